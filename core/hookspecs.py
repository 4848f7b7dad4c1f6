"""The contract between gammadot's core and its plugins: every hook, documented.

All hooks are *catalogue* hooks: the core calls each of them once per process, right after
the plugin manager is built (:func:`gammadot.registry.build_registry`), and every plugin that
implements one returns a sequence of frozen records (:mod:`gammadot.records`). The records
carry the functions the pipeline calls later, per file or per run. Records of all plugins are
combined into one catalogue; two records of the same kind with the same ``id`` stop start-up
with an error naming both plugins. Returning an empty sequence (or ``None``) means "nothing
of this kind".

Units: every value handed to or returned by a record's function is SI (shear rate 1/s,
stress Pa, viscosity Pa·s, torque N·m, angular velocity rad/s, force N, time s, length m,
angle rad), temperature in °C.

A plugin is a module or object with functions decorated by :data:`gammadot.hookimpl`,
registered through the ``gammadot`` entry-point group (third parties) or listed in
``gammadot.plugins.BUILTIN_PLUGINS`` (built-ins). A failure while a record's function runs
on a file or run is recorded against that file or run, naming the plugin; the study goes on.
"""

from __future__ import annotations

from typing import Sequence

import pluggy

from .records import Analysis, Check, GeometryType, Importer, Model, RunSection, Writer

PROJECT_NAME = "gammadot"

# The version of this contract. A plugin declares the versions it supports in a module (or
# object) attribute ``GAMMADOT_HOOKSPEC``, a PEP 440 specifier such as ">=1,<2"; a plugin whose
# range excludes this version is refused at start-up (gammadot.compat). The minor number grows
# when hooks or optional record fields are added (old plugins keep working), the major number
# when a hook or record changes incompatibly.
HOOKSPEC_VERSION = "1.0"

hookspec = pluggy.HookspecMarker(PROJECT_NAME)
hookimpl = pluggy.HookimplMarker(PROJECT_NAME)


@hookspec
def gammadot_importers() -> Sequence[Importer]:
    """Return the file importers this plugin provides.

    Called once at start-up. For each input file the core calls every importer's
    ``sniff(path, head)`` with the first 64 KiB; the highest confidence above 0 wins (ties go
    to the importer registered later, so a lab's importer overrides a built-in). The winner's
    ``read(path, context)`` returns :class:`~gammadot.records.RawRun` records: metadata text
    and columns with their unit text, which the core resolves to quantities and SI units
    (:mod:`gammadot.columns`). ``read`` raises :class:`~gammadot.records.ImportRejection` with
    a line number for a file it cannot read; any other exception rejects the file too, naming
    the plugin.
    """


@hookspec
def gammadot_geometries() -> Sequence[GeometryType]:
    """Return the measuring geometries this plugin provides.

    Called once at start-up. A run whose geometry (from its metadata, resolved against
    ``study.toml``) has ``type = X`` is converted by the geometry with ``id == X``; a run with
    no geometry uses the geometry ``instrument`` (pass-through of the instrument's own shear
    rate, stress and viscosity). ``convert(run, geometry)`` returns a
    :class:`~gammadot.records.Conversion` (SI arrays, one value per point) or ``None`` when
    the run lacks the columns the geometry needs.
    """


@hookspec
def gammadot_models() -> Sequence[Model]:
    """Return the constitutive models this plugin provides.

    Called once at start-up. Each model is fitted to every run whose study selects it (all
    models by default). ``function(shear_rate, **params)`` returns viscosity (Pa·s) or shear
    stress (Pa) as the record's ``target`` says; parameter names and units are the public
    contract (see README, "Model ids").
    """


@hookspec
def gammadot_checks() -> Sequence[Check]:
    """Return the data-quality checks this plugin provides.

    Called once at start-up. ``run(run, context)`` is called for every converted run, before
    fitting; its point findings with ``exclude=True`` keep points out of fits (they stay in
    points.parquet with the check id in ``flags``). A check with ``after_fit=True`` runs after
    fitting instead, sees the fits in ``context.fits`` and only flags points.
    ``study.toml`` ``[checks.<id>]`` can turn a check off (``enabled = false``), keep its
    points in the fit (``exclude = false``) and set the check's own thresholds (the check reads
    ``context.settings``).
    """


@hookspec
def gammadot_analyses() -> Sequence[Analysis]:
    """Return the study-level analyses this plugin provides.

    Called once at start-up. After every run of a study was converted, checked and fitted,
    each analysis's ``run(result)`` is called once with the
    :class:`~gammadot.pipeline.StudyResult`; it returns an
    :class:`~gammadot.records.AnalysisOutput` (extra tables, findings per run id) or ``None``
    when the study has nothing for it. A raising analysis is recorded and the others go on.
    """


@hookspec
def gammadot_writers() -> Sequence[Writer]:
    """Return the output writers this plugin provides.

    Called once at start-up. After a study is processed every writer's
    ``write(result, out_dir)`` is called in ascending ``order`` with the
    :class:`~gammadot.pipeline.StudyResult`; it returns the paths it wrote. Writers write
    atomically and never below the input files except inside ``out_dir``.
    """


@hookspec
def gammadot_run_sections() -> Sequence[RunSection]:
    """Return the sections this plugin adds to every run's page of the study site.

    Called once at start-up. When the site is written, each section's ``render(run_result)``
    is called for every run with its :class:`~gammadot.processing.RunResult` (the run, its
    fits, findings and excluded points). It returns an HTML fragment, or ``None`` to leave the
    section out of that run's page. The fragment is inserted as it is: the plugin escapes
    every text it takes from input files (``markupsafe.escape`` or ``html.escape``) and links
    to nothing outside the site. Sections appear after the findings, in ascending ``order``;
    a render that raises shows a one-line note instead of the section, and the site is
    written anyway.
    """

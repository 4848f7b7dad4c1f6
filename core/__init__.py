"""gammadot: flow-curve pipeline for rheology labs.

Public API for plugin authors: :data:`hookimpl` and the records of :mod:`gammadot.records`.
Importing this package is cheap; numpy, pint, lmfit and pyarrow load only when work starts.
"""

from .hookspecs import hookimpl
from .records import (
    Analysis,
    AnalysisOutput,
    AnalysisTable,
    Check,
    CheckContext,
    CheckSetting,
    Conversion,
    Finding,
    GeometryParameter,
    GeometryType,
    ImportContext,
    Importer,
    ImportRejection,
    Model,
    ModelParameter,
    RawColumn,
    RawRun,
    Result,
    RunSection,
    Writer,
)

__version__ = "0.1.0"

__all__ = [
    "Analysis",
    "AnalysisOutput",
    "AnalysisTable",
    "Check",
    "CheckContext",
    "CheckSetting",
    "Conversion",
    "Finding",
    "GeometryParameter",
    "GeometryType",
    "ImportContext",
    "ImportRejection",
    "Importer",
    "Model",
    "ModelParameter",
    "RawColumn",
    "RawRun",
    "Result",
    "RunSection",
    "Writer",
    "__version__",
    "hookimpl",
]

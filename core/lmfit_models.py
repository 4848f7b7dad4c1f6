"""gammadot models as lmfit models: the interface model authors write against.

A gammadot :class:`~gammadot.records.Model` is one function plus a ``guess``. Wrapped here as
an ``lmfit.Model`` (built once per model and cached, so nothing is re-parsed per fit) it is an
ordinary lmfit model: the function's signature gives the parameter names, the model's bounds
become parameter hints, and ``guess`` uses the model's own data-driven starting values::

    from gammadot.lmfit_models import as_lmfit_model
    from gammadot.plugins.plateau_models import CARREAU

    carreau = as_lmfit_model(CARREAU)            # an lmfit.Model
    params = carreau.guess(viscosity, shear_rate=rate)
    result = carreau.fit(viscosity, params, shear_rate=rate)

The fitting engine (:mod:`gammadot.least_squares`) takes its parameters, bounds and bound
transforms from these objects, so a bound means in gammadot exactly what it means in lmfit.
"""

from __future__ import annotations

import functools
import inspect
from typing import Any, Mapping, Sequence

import lmfit
import numpy as np

from .records import Model


class ModelDefinitionError(ValueError):
    """A model record whose function and declared parameters do not agree."""


def independent_variable(model: Model) -> str:
    """The name of the function's first argument: the independent variable (shear rate)."""
    first = next(iter(inspect.signature(model.function).parameters.values()), None)
    if first is None:
        raise ModelDefinitionError(f"model '{model.id}': its function takes no arguments")
    return first.name


def first_start(starts: Mapping[str, float] | Sequence[Mapping[str, float]]) -> Mapping[str, float]:
    """A guess may return one start or several (multi-start); lmfit's ``guess`` takes the first."""
    return starts if isinstance(starts, Mapping) else starts[0]


class _GammadotLmfitModel(lmfit.Model):
    """An lmfit.Model around a gammadot model record, with the record's ``guess``."""

    def __init__(self, record: Model, **kws: Any) -> None:
        self.record = record
        super().__init__(record.function, independent_vars=[independent_variable(record)],
                         name=record.id, **kws)

    def guess(self, data: np.ndarray, x: np.ndarray | None = None, **kws: Any) -> lmfit.Parameters:
        """Parameters started from the record's data-driven guess (lmfit's ``guess`` protocol)."""
        rate = kws.pop(self.independent_vars[0], x)
        start = first_start(self.record.guess(np.asarray(rate, float), np.asarray(data, float)))
        return self.make_params(**{k: float(v) for k, v in start.items()})


@functools.lru_cache(maxsize=512)
def as_lmfit_model(model: Model) -> lmfit.Model:
    """The model as an ``lmfit.Model`` whose parameter hints carry the model's bounds (cached).

    Raises :class:`ModelDefinitionError` when the function's parameters and the declared
    :class:`~gammadot.records.ModelParameter` names differ (a typo would otherwise fit nonsense).
    """
    wrapped = _GammadotLmfitModel(model)
    declared = [p.name for p in model.parameters]
    if sorted(wrapped.param_names) != sorted(declared):
        raise ModelDefinitionError(
            f"model '{model.id}': the function's parameters ({', '.join(wrapped.param_names)}) "
            f"differ from the declared ones ({', '.join(declared)})")
    for spec in model.parameters:
        wrapped.set_param_hint(spec.name, min=spec.min, max=spec.max)
    return wrapped

"""Pluggable unit types: a measurement schema, a compute function and a result schema.

A unit type is what a kind of machine needs to be monitored: the gas turbine now, gas engines
and Diesel sets later.  Feeds, storage, metrics and the CLI only ever talk to this interface, so
a new unit type plugs in without touching them.

This module holds the interface only and imports no unit type: the shipped types are listed
by :func:`models.units.registry.builtin_unit_types`, and the daemon may add more from the
``brayscope.unit_types`` entry-point group.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, Protocol, runtime_checkable

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "ComputeOutput",
    "FieldSpec",
    "UnitType",
]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class FieldSpec:
    """One named quantity of a unit type's schema (a measurement, a parameter or a result).

    ``name`` is the glossary name used in code, JSON, SQL and metrics; ``unit`` is the SI unit
    (``"K"``, ``"Pa"``, ``"kg/s"``, ``"W"``, ``"1"`` for dimensionless, ``"kJ/kWh"``).  ``low`` and
    ``high`` bound the physically possible (for measurements: what is rejected outright) range.
    ``default`` is used for optional parameters when absent.
    """

    name: str
    unit: str
    description: str
    required: bool = True
    low: float = -np.inf
    high: float = np.inf
    default: float | None = None


@dataclass(frozen=True)
class ComputeOutput:
    """What a unit type's compute returns for a batch of N snapshots.

    ``values`` maps result names (see the unit type's ``results``) to float64 arrays of shape
    ``(N,)``, NaN where not computable; ``status`` is a ``uint32`` array of
    :class:`models.status.Reason` bits, shape ``(N,)``; ``labels`` carries per-batch text labels
    (e.g. ``{"correction_method": "model"}``) and ``label_arrays`` per-element text labels.
    """

    values: Mapping[str, FloatArray]
    status: NDArray[np.uint32]
    labels: Mapping[str, str] = field(default_factory=dict)
    label_arrays: Mapping[str, NDArray[np.str_]] = field(default_factory=dict)


@runtime_checkable
class UnitType(Protocol):
    """Interface every unit type implements."""

    name: str
    description: str
    measurements: tuple[FieldSpec, ...]
    parameters: tuple[FieldSpec, ...]
    results: tuple[FieldSpec, ...]

    def compute(
        self,
        measurements: Mapping[str, FloatArray],
        fuel: Any,
        parameters: Mapping[str, FloatArray | float],
        corrections: Any = None,
    ) -> ComputeOutput:
        """Compute a batch.

        ``measurements`` arrays share one shape ``(N,)``; missing
        optional measurements are absent or all-NaN.  ``fuel`` is the unit type's own fuel
        description object; ``corrections`` its optional correction-table object.
        """
        ...

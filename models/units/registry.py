"""The unit types shipped with ``models``, by name.

The registry imports the unit types; the interface (:mod:`models.units.base`) imports none of
them, so there is no cycle between the interface and its implementations.  The daemon adds
the unit types of other packages from the ``brayscope.unit_types`` entry-point group.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from models.units.base import UnitType
from models.units.gas_turbine.schema import GAS_TURBINE

__all__ = ["builtin_unit_types"]


def builtin_unit_types() -> Mapping[str, UnitType]:
    """Return the unit types shipped with ``models`` as a read-only mapping name → type.

    Returns
    -------
    Mapping[str, UnitType]
        Read-only mapping from the unit-type name (``"gas_turbine"``) to its instance.

    Examples
    --------
    >>> sorted(builtin_unit_types())
    ['gas_turbine']
    """
    types: dict[str, UnitType] = {GAS_TURBINE.name: GAS_TURBINE}
    return MappingProxyType(types)

"""Species of brayscope's gas-phase property tables, in the order of every composition array.

The order is that of the last axis.  The first six are the working fluid and combustion
products; the rest are fuel-gas components (needed for the fuel's own sensible enthalpy and
for ISO 6976 chemistry).
"""

from __future__ import annotations

from types import MappingProxyType

__all__ = ["FUEL_SPECIES", "INDEX", "N_SPECIES", "SPECIES", "WORKING_SPECIES"]

SPECIES: tuple[str, ...] = (
    "N2",
    "O2",
    "Ar",
    "CO2",
    "H2O",
    "SO2",
    "CH4",
    "C2H6",
    "C3H8",
    "n-C4H10",
    "i-C4H10",
    "n-C5H12",
    "i-C5H12",
    "n-C6H14",
    "H2",
    "CO",
    "H2S",
    "He",
)
WORKING_SPECIES: tuple[str, ...] = SPECIES[:6]
FUEL_SPECIES: tuple[str, ...] = SPECIES[6:]
N_SPECIES = len(SPECIES)
INDEX = MappingProxyType({name: i for i, name in enumerate(SPECIES)})

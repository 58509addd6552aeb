"""Working fluids of the gas-turbine cycle as property-kernel fluids.

Humid air per kg of humid air is two basis parts of the kernel (dry air, and water minus dry
air, :func:`models.properties.humid_air.humid_air_fluid`).  Per kg of *air*, every property of
the combustion gas is linear in the fuel-air ratio f: ``H_g(T, p) = h_a(T, p) + f h_pd(T, p)``,
where ``h_pd`` is the enthalpy of the species change of 1 kg of burnt fuel
(``FuelProperties.product_delta``), so the gas is ``air.with_part(fd.tab, f, fd.R)`` and its
coefficient rows are built once per chunk.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from models.correction.gas_turbine import (
    REFERENCE_PRESSURE,
    REFERENCE_RELATIVE_HUMIDITY,
    REFERENCE_TEMPERATURE,
)
from models.properties import humid_air, kernel, mixtures
from models.properties.fuel import FuelProperties
from models.properties.species import INDEX, N_SPECIES
from models.status import ModelInputError

__all__ = [
    "DRY_AIR_O2_MASS_FRACTION",
    "FuelData",
    "FuelHeat",
    "ReferenceAmbient",
    "fuel_data",
    "reference_ambient",
]

FloatArray = NDArray[np.float64]

#: O2 mass fraction of dry air [-] (:data:`models.properties.humid_air.DRY_AIR`).
DRY_AIR_O2_MASS_FRACTION: float = float(humid_air.DRY_AIR_MASS_FRACTIONS[INDEX["O2"]])


@dataclass(frozen=True)
class FuelData:
    """A fuel (or a batch of fuels) as the kernel needs it.

    ``lhv``, ``hhv`` [J/kg] of shape (N,) or (); ``tab`` the coefficient rows of the species
    change per kg of fuel burnt, (2, 17) or (2, 17, N); ``R`` its gas constant
    [J/(kg_fuel K)]; ``o2`` the O2 consumed per kg of fuel [kg/kg] (> 0); ``valid`` whether
    the heating values and the O2 demand are usable.
    """

    lhv: FloatArray
    hhv: FloatArray
    tab: FloatArray
    R: FloatArray
    o2: FloatArray
    valid: NDArray[np.bool_]

    def take(self, sl: slice) -> FuelData:
        """Return the fuel data of the elements ``sl`` (itself for a single fuel).

        Parameters
        ----------
        sl : slice
            Elements of the batch.

        Returns
        -------
        FuelData
            The slice (views, no copies).
        """
        if self.lhv.ndim == 0:
            return self
        return FuelData(
            self.lhv[sl], self.hhv[sl], self.tab[..., sl], self.R[sl], self.o2[sl], self.valid[sl]
        )


def fuel_data(fuel: FuelProperties, n: int) -> FuelData:
    r"""Build :class:`FuelData` from a fuel of :mod:`models.properties.fuel`.

    Parameters
    ----------
    fuel : FuelProperties
        One fuel, or a batch of n.
    n : int
        Batch length of the measurements.

    Returns
    -------
    FuelData
        Heating values, the rows of the burnt species change, its gas constant, O2 demand.

    Raises
    ------
    ModelInputError
        ``product_delta`` of the wrong shape, or a fuel batch of another length than n.

    Notes
    -----
    .. math:: c_{pd} = \sum_i \Delta y_i\, c_i, \qquad R_{pd} = R_u \sum_i \Delta y_i / M_i

    with :math:`\Delta y_i` the species change per kg of fuel burnt (products and inerts +,
    O2 consumed -; sums to 1).

    References
    ----------
    .. [1] ISO 6976:2016 (heating values of :mod:`models.properties.fuel`).
    """
    pd = np.asarray(fuel.product_delta, dtype=np.float64)
    lhv = np.asarray(fuel.lhv, dtype=np.float64)
    hhv = np.asarray(fuel.hhv, dtype=np.float64)
    if pd.shape[-1] != N_SPECIES or pd.ndim > 2:
        raise ModelInputError("fuel.product_delta", pd.shape, f"(N_SPECIES,) or (N, {N_SPECIES})")
    if pd.ndim == 2 and pd.shape[0] != n:
        raise ModelInputError("fuel", pd.shape[0], f"a single fuel or a batch of {n}")
    tab = kernel.mixture_rows(pd)
    R = np.asarray(mixtures.R_UNIVERSAL * (pd @ (1.0 / mixtures.MOLAR_MASS)))
    o2 = np.asarray(-pd[..., INDEX["O2"]])
    valid = np.asarray(np.isfinite(lhv) & (lhv > 0) & np.isfinite(hhv) & (o2 > 0))
    return FuelData(lhv, hhv, tab, R, o2, valid)


@dataclass(frozen=True)
class FuelHeat:
    """A single fuel whose sensible enthalpy each chunk evaluates itself.

    ``zero``: every fuel temperature used is 298.15 K, so h_f = 0 exactly.
    """

    fuel: FuelProperties
    zero: bool


@dataclass(frozen=True)
class ReferenceAmbient:
    """Constants of the reference ambient, computed once per call.

    ``y_w`` the water mass fraction of reference humid air [-]; ``air`` that humid air
    (scalar coefficient rows, cached across chunks).
    """

    y_w: float
    air: kernel.Fluid


def reference_ambient() -> ReferenceAmbient:
    r"""Humid air at the reference conditions of :mod:`models.correction.gas_turbine`.

    Returns
    -------
    ReferenceAmbient
        15 °C, 101.325 kPa, 60 % RH (ISO 2314 / ISO 3977-2).

    References
    ----------
    .. [1] ISO 2314:2009, Gas turbines — Acceptance tests.
    .. [2] ISO 3977-2:1997, Gas turbines — Procurement — Part 2: Standard reference conditions
       and ratings.
    """
    y_w = float(
        humid_air.water_mass_fraction(
            np.array(REFERENCE_TEMPERATURE),
            np.array(REFERENCE_PRESSURE),
            np.array(REFERENCE_RELATIVE_HUMIDITY),
            np.zeros((), dtype=np.uint32),
        )
    )
    return ReferenceAmbient(y_w, humid_air.humid_air_fluid(y_w))

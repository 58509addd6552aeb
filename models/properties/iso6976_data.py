"""Component data of ISO 6976:2016 for the gas components brayscope handles.

ISO 6976:2016, *Natural gas — Calculation of calorific values, density, relative density and
Wobbe indices from composition*, Annex A.  Values are typed here in the standard's own units
(g/mol = kg/kmol, kJ/mol, kPa, °C) and converted to SI once, by the accessor functions below.

Provenance: the numbers are the standard's Annex A table values as typed in the
open-source implementation ``RuedigerForster/ISO_6976`` (file ``src/iso6976.cpp``, tables
``TAB_M``, ``TAB_S``, ``TAB_HC``, ``Z_AIR``, ``L_VAP``), and checked (``tests/test_fuel.py``)
against the worked examples of ISO 6976:2016 Annex D (Examples 1, 2 and 3 reproduce to the
published digits) and against the 25 °C gross values of Table A.4 quoted in the project's
physics notes.

Only a subset of the standard's 60 components is typed: the fuel species of
:mod:`models.properties.species` plus a few further hydrocarbons (neopentane, n-heptane, n-octane,
ethylene, propylene) and SO2, which :func:`models.properties.fuel.iso6976` accepts.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "ATOMIC_MASS",
    "COMBUSTION_TEMPERATURES_C",
    "COMPONENTS",
    "METERING_TEMPERATURES_C",
    "M_AIR",
    "P0",
    "Component",
    "R",
    "atoms",
    "combustion_column",
    "enthalpy_of_vaporization",
    "gross_molar",
    "metering_column",
    "molar_mass",
    "summation_factor",
    "z_air",
]

# --- constants ---------------------------------------------------------------------------------
#: Molar gas constant [J/(mol K)], the value ISO 6976:2016 uses (CODATA 2010).
R = 8.3144621
#: Reference pressure of the summation-factor method [Pa] (ISO 6976:2016, 101.325 kPa).
P0 = 101325.0
#: Molar mass of dry air [kg/mol] (ISO 6976:2016 Table A.1: 28.96546 kg/kmol).
M_AIR = 28.96546e-3

#: Atomic masses used by ISO 6976:2016 for its molar masses [g/mol] (C, H, N, O, S; He, Ar are
#: whole-molecule values).  CH4 = 12.0107 + 4 * 1.00794 = 16.04246 g/mol.
ATOMIC_MASS = MappingProxyType(
    {"C": 12.0107, "H": 1.00794, "N": 14.0067, "O": 15.9994, "S": 32.065}
)

#: Combustion reference temperatures of the calorific-value table [°C] (ISO 6976:2016 Table A.4).
COMBUSTION_TEMPERATURES_C: tuple[float, ...] = (0.0, 15.0, 15.55, 20.0, 25.0)
#: Metering reference temperatures of the summation-factor table [°C] (Table A.3).
METERING_TEMPERATURES_C: tuple[float, ...] = (0.0, 15.0, 15.55, 20.0)

# ISO 6976:2016 Table A.1: compression factor of dry air at 101.325 kPa, at 0, 15, 15.55, 20 °C.
_Z_AIR = (0.999419, 0.999595, 0.999601, 0.999645)

# ISO 6976:2016 (Table A.4, water row / Eq. for net calorific value): standard enthalpy of
# vaporization of water L°(t) [kJ/mol] at 0, 15, 15.55, 20, 25 °C.
_L_VAP = (45.064, 44.431, 44.408, 44.222, 44.013)


@dataclass(frozen=True)
class Component:
    """One ISO 6976:2016 component.

    ``molar_mass`` [g/mol] from Table A.2; ``atoms`` = (C, H, N, O, S, He, Ar) counts;
    ``s`` summation factors at 0, 15, 15.55, 20 °C from Table A.3; ``hc`` ideal-gas gross molar
    calorific values [kJ/mol] at 0, 15, 15.55, 20, 25 °C from Table A.4.
    """

    iso_number: int
    iso_name: str
    molar_mass: float
    atoms: tuple[int, int, int, int, int, int, int]
    s: tuple[float, float, float, float]
    hc: tuple[float, float, float, float, float]


_NO_HEAT = (0.0, 0.0, 0.0, 0.0, 0.0)

# fmt: off
# key: (ISO 6976 component number and name; M [g/mol] Table A.2; atoms C H N O S He Ar;
#       s(0, 15, 15.55, 20 °C) Table A.3; Hc gross (0, 15, 15.55, 20, 25 °C) [kJ/mol] Table A.4)
_TABLE: dict[str, Component] = {
    "CH4": Component(1, "methane", 16.04246, (1, 4, 0, 0, 0, 0, 0),
                     (0.04886, 0.04452, 0.04437, 0.04317),
                     (892.92, 891.51, 891.46, 891.05, 890.58)),
    "C2H6": Component(2, "ethane", 30.06904, (2, 6, 0, 0, 0, 0, 0),
                      (0.0997, 0.0919, 0.0916, 0.0895),
                      (1564.35, 1562.14, 1562.06, 1561.42, 1560.69)),
    "C3H8": Component(3, "propane", 44.09562, (3, 8, 0, 0, 0, 0, 0),
                      (0.1465, 0.1344, 0.1340, 0.1308),
                      (2224.03, 2221.10, 2220.99, 2220.13, 2219.17)),
    "n-C4H10": Component(4, "n-butane", 58.12220, (4, 10, 0, 0, 0, 0, 0),
                         (0.2022, 0.1840, 0.1834, 0.1785),
                         (2883.35, 2879.76, 2879.63, 2878.58, 2877.40)),
    "i-C4H10": Component(5, "2-methylpropane", 58.12220, (4, 10, 0, 0, 0, 0, 0),
                         (0.1885, 0.1722, 0.1717, 0.1673),
                         (2874.21, 2870.58, 2870.45, 2869.39, 2868.20)),
    "n-C5H12": Component(6, "n-pentane", 72.14878, (5, 12, 0, 0, 0, 0, 0),
                         (0.2586, 0.2361, 0.2354, 0.2295),
                         (3542.91, 3538.60, 3538.45, 3537.19, 3535.77)),
    "i-C5H12": Component(7, "2-methylbutane", 72.14878, (5, 12, 0, 0, 0, 0, 0),
                         (0.2458, 0.2251, 0.2244, 0.2189),
                         (3536.01, 3531.68, 3531.52, 3530.25, 3528.83)),
    "neo-C5H12": Component(8, "2,2-dimethylpropane", 72.14878, (5, 12, 0, 0, 0, 0, 0),
                           (0.2245, 0.2040, 0.2033, 0.1979),
                           (3521.75, 3517.44, 3517.28, 3516.02, 3514.61)),
    "n-C6H14": Component(9, "n-hexane", 86.17536, (6, 14, 0, 0, 0, 0, 0),
                         (0.3319, 0.3001, 0.2990, 0.2907),
                         (4203.24, 4198.24, 4198.06, 4196.60, 4194.95)),
    "n-C7H16": Component(14, "n-heptane", 100.20194, (7, 16, 0, 0, 0, 0, 0),
                         (0.4076, 0.3668, 0.3654, 0.3547),
                         (4862.88, 4857.18, 4856.98, 4855.31, 4853.43)),
    "n-C8H18": Component(15, "n-octane", 114.22852, (8, 18, 0, 0, 0, 0, 0),
                         (0.4845, 0.4346, 0.4329, 0.4198),
                         (5522.41, 5516.01, 5515.78, 5513.90, 5511.80)),
    "C2H4": Component(18, "ethylene", 28.05316, (2, 4, 0, 0, 0, 0, 0),
                      (0.0868, 0.0799, 0.0797, 0.0778),
                      (1413.55, 1412.12, 1412.07, 1411.65, 1411.18)),
    "C3H6": Component(19, "propylene", 42.07974, (3, 6, 0, 0, 0, 0, 0),
                      (0.1381, 0.1267, 0.1263, 0.1232),
                      (2061.57, 2059.43, 2059.35, 2058.73, 2058.02)),
    "H2": Component(41, "hydrogen", 2.01588, (0, 2, 0, 0, 0, 0, 0),
                    (-0.01, -0.01, -0.01, -0.01),
                    (286.64, 286.15, 286.13, 285.99, 285.83)),
    # Water vapour: its "gross calorific value" is L°(t), the enthalpy released when it
    # condenses with the combustion water; its net value is zero (ISO 6976:2016).
    "H2O": Component(42, "water", 18.01528, (0, 2, 0, 1, 0, 0, 0),
                     (0.3093, 0.2562, 0.2546, 0.2419),
                     (45.064, 44.431, 44.408, 44.222, 44.013)),
    "H2S": Component(43, "hydrogen sulfide", 34.08088, (0, 2, 0, 0, 1, 0, 0),
                     (0.1006, 0.0923, 0.0920, 0.0898),
                     (562.93, 562.38, 562.36, 562.19, 562.01)),
    "CO": Component(46, "carbon monoxide", 28.0101, (1, 0, 0, 1, 0, 0, 0),
                    (0.0258, 0.0217, 0.0215, 0.0203),
                    (282.80, 282.91, 282.91, 282.95, 282.98)),
    "He": Component(49, "helium", 4.002602, (0, 0, 0, 0, 0, 1, 0),
                    (-0.01, -0.01, -0.01, -0.01), _NO_HEAT),
    "Ar": Component(51, "argon", 39.948, (0, 0, 0, 0, 0, 0, 1),
                    (0.0307, 0.0273, 0.0272, 0.0262), _NO_HEAT),
    "N2": Component(52, "nitrogen", 28.0134, (0, 0, 2, 0, 0, 0, 0),
                    (0.0214, 0.0170, 0.0169, 0.0156), _NO_HEAT),
    "O2": Component(53, "oxygen", 31.9988, (0, 0, 0, 2, 0, 0, 0),
                    (0.0311, 0.0276, 0.0275, 0.0265), _NO_HEAT),
    "CO2": Component(54, "carbon dioxide", 44.0095, (1, 0, 0, 2, 0, 0, 0),
                     (0.0821, 0.0752, 0.0749, 0.0730), _NO_HEAT),
    "SO2": Component(55, "sulfur dioxide", 64.0638, (0, 0, 0, 2, 1, 0, 0),
                     (0.1579, 0.1406, 0.1400, 0.1356), _NO_HEAT),
}
# fmt: on

#: The typed components, keyed by brayscope species name (see :mod:`models.properties.species`).
COMPONENTS: MappingProxyType[str, Component] = MappingProxyType(_TABLE)

_TOL_C = 1e-6


def _column(t_C: float, temps: tuple[float, ...]) -> int | None:
    for i, t in enumerate(temps):
        # 15.55 °C is the standard's rounding of 60 °F (15.5556 °C): accept either spelling.
        tol = 0.006 if t == 15.55 else _TOL_C
        if abs(t_C - t) <= tol:
            return i
    return None


def combustion_column(t_C: float) -> int | None:
    r"""Column index of the calorific-value table for ``t_C`` [°C], or None if not tabulated.

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.4 (columns).
    """
    return _column(float(t_C), COMBUSTION_TEMPERATURES_C)


def metering_column(t_C: float) -> int | None:
    r"""Column index of the summation-factor table for ``t_C`` [°C], or None if not tabulated.

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.3 (columns).
    """
    return _column(float(t_C), METERING_TEMPERATURES_C)


def molar_mass(names: tuple[str, ...]) -> NDArray[np.float64]:
    r"""Molar masses of ``names`` [kg/mol] (ISO 6976:2016 Table A.2).

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.2.
    """
    return np.array([COMPONENTS[n].molar_mass for n in names]) * 1e-3


def atoms(names: tuple[str, ...]) -> NDArray[np.float64]:
    r"""Atom counts of ``names``, shape ``(len(names), 7)``, columns C, H, N, O, S, He, Ar.

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.2 (component formulae).
    """
    return np.array([COMPONENTS[n].atoms for n in names], dtype=np.float64)


def summation_factor(names: tuple[str, ...], column: int) -> NDArray[np.float64]:
    r"""Summation factors s_i [-] at metering-table ``column`` (ISO 6976:2016 Table A.3).

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.3.
    """
    return np.array([COMPONENTS[n].s[column] for n in names])


def gross_molar(names: tuple[str, ...], column: int) -> NDArray[np.float64]:
    r"""Ideal-gas gross molar calorific values [J/mol] at combustion-table ``column`` (Table A.4).

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.4.
    """
    return np.array([COMPONENTS[n].hc[column] for n in names]) * 1e3


def enthalpy_of_vaporization(column: int) -> float:
    r"""Return the standard enthalpy of vaporization of water L° [J/mol] at table ``column``.

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.4 (water row).
    """
    return _L_VAP[column] * 1e3


def z_air(column: int) -> float:
    r"""Compression factor of dry air at 101.325 kPa at metering-table ``column`` (Table A.1).

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, Table A.1.
    """
    return _Z_AIR[column]

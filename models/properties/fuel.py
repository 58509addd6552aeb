"""Fuel chemistry: heating values, Wobbe index, stoichiometric air and combustion products.

Length (about 670 lines, above the project's 600): the ISO 6976 calculation, liquid fuels
and the combustion products all fill one FuelProperties; half of it is documentation and
the check values of the standard.

Gas fuels follow ISO 6976:2016 (component table in :mod:`models.properties.iso6976_data`); liquid
fuels are described by their lower heating value and C/H/S (optionally O) mass fractions.
Everything is SI: J/mol, J/kg, J/m^3, kg/mol, K, Pa.  All functions are vectorised: each composition
value may be an array over a batch, and every result has that batch shape.

Reference conditions (state them with every reported number):

* ``lhv``/``hhv`` of :func:`gas_fuel`: combustion reference 25 °C (298.15 K) unless set — the
  basis matching sensible enthalpies measured from 298.15 K in the cycle heat balance.
* ``wobbe_index``, ``relative_density``, ``compression_factor`` of :func:`gas_fuel`: gross,
  real-gas, metering at 15 °C and 101.325 kPa, combustion at 15 °C, unless set (the ISO 6976
  "15 °C/15 °C" basis).
* ``stoichiometric_air``: kg of *standard dry air* (:data:`STANDARD_DRY_AIR`, CIPM-2007
  composition) per kg of fuel.  For another air, divide ``-product_delta[..., O2]`` by that
  air's O2 mass fraction (:func:`stoichiometric_air_ratio`).

Errors: misuse raises :class:`models.status.ModelInputError` (unknown species, negative mole
fraction, composition not summing to 1 within 1e-4, untabulated reference temperature,
LHV <= 0, mass fractions outside [0, 1]).

Advisory use only: brayscope is a monitoring aid, not a protection or control system.  Fuel
properties for custody transfer or safety decisions come from the site's certified analysis.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import iso6976_data as iso
from models.properties import mixtures
from models.properties.species import INDEX, N_SPECIES, SPECIES
from models.status import ModelInputError, Reason

__all__ = [
    "GAS_COMPONENTS",
    "ISO6976_COMPONENTS",
    "LATENT_HEAT_WATER_25C",
    "REFERENCE_TEMPERATURE",
    "SPECIES_MOLAR_MASS",
    "STANDARD_DRY_AIR",
    "FuelProperties",
    "gas_fuel",
    "iso6976",
    "liquid_fuel",
    "stoichiometric_air_ratio",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]
OnInvalid = Literal["raise", "nan"]

#: Components accepted by :func:`gas_fuel` (names as in :data:`models.properties.species.SPECIES`).
GAS_COMPONENTS: tuple[str, ...] = (
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
    "N2",
    "CO2",
    "O2",
    "Ar",
    "He",
    "H2O",
)
#: Components accepted by :func:`iso6976` (a superset: no ideal-gas enthalpy data needed).
ISO6976_COMPONENTS: tuple[str, ...] = tuple(iso.COMPONENTS)

#: Reference temperature of heating values and sensible enthalpies [K] (25 °C).
REFERENCE_TEMPERATURE = 298.15

#: Standard enthalpy of vaporization of water at 25 °C per unit mass [J/kg]:
#: L°(25 °C) = 44.013 kJ/mol (ISO 6976:2016) / 18.01528 g/mol = 2443.1 kJ/kg.  The same value
#: links gross and net for gas and liquid fuels, so both share one basis (ideal-gas water vapour
#: at 25 °C).  The saturation value of IAPWS-95 at 25 °C, 2441.7 kJ/kg, differs by 0.06 %.
LATENT_HEAT_WATER_25C = 44.013e3 / 18.01528e-3

_A = iso.ATOMIC_MASS
_M_C, _M_H, _M_N, _M_O, _M_S = (_A["C"] * 1e-3, _A["H"] * 1e-3, _A["N"] * 1e-3,
                                _A["O"] * 1e-3, _A["S"] * 1e-3)  # fmt: skip

#: Molar masses of :data:`models.properties.species.SPECIES` [kg/mol] on ISO 6976:2016's atomic
#: masses, so that element balances (and ``product_delta`` summing to 1) hold to rounding.
SPECIES_MOLAR_MASS: FloatArray = iso.molar_mass(SPECIES)

#: Standard dry air [mole fraction] over N2, O2, Ar, CO2: CIPM-2007 composition (Picard et al.,
#: Metrologia 45 (2008) 149, Table 1: O2 0.209390, Ar 0.009332, CO2 0.000400; the 27 µmol/mol of
#: trace gases are lumped into N2).  Its molar mass, 28.9653 g/mol, matches ISO 6976's 28.96546.
STANDARD_DRY_AIR = MappingProxyType(
    {"N2": 1.0 - 0.209390 - 0.009332 - 0.000400, "O2": 0.209390, "Ar": 0.009332, "CO2": 0.000400}
)


def _air_o2_mass_fraction(air: Mapping[str, float]) -> float:
    m = sum(x * SPECIES_MOLAR_MASS[INDEX[k]] for k, x in air.items())
    return float(air["O2"] * SPECIES_MOLAR_MASS[INDEX["O2"]] / m)


_Y_O2_STD_AIR = _air_o2_mass_fraction(STANDARD_DRY_AIR)
_COMPOSITION_TOL = 1e-4


# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class FuelProperties:
    """Properties of a fuel, batch shape ``(...)`` (``()`` for a single fuel).

    Attributes
    ----------
    kind : {"gas", "liquid"}
    molar_mass : ndarray [kg/mol]  (NaN for liquid)
    lhv, hhv : ndarray [J/kg]  net (lower) and gross (higher) heating value at
        ``combustion_temperature``
    lhv_molar, hhv_molar : ndarray [J/mol]  (NaN for liquid)
    wobbe_index : ndarray [J/m^3]  gross, real gas, at ``wobbe_combustion_temperature`` and the
        metering conditions (NaN for liquid)
    relative_density, compression_factor : ndarray [-]  real gas at metering conditions
    stoichiometric_air : ndarray [kg dry air / kg fuel]  for :data:`STANDARD_DRY_AIR`
    carbon_mass_fraction, hydrogen_mass_fraction, sulfur_mass_fraction : ndarray [-]
    product_delta : ndarray (..., N_SPECIES) [kg / kg fuel]  change of each species of
        :data:`models.properties.species.SPECIES` when 1 kg of fuel burns completely in air:
        products and inert fuel components +, O2 consumed −.  Sums to 1 over species.
    composition : ndarray (..., N_SPECIES) or None  mole fractions (gas fuel only)
    liquid_cp : ndarray [J/(kg K)]  (NaN for gas)
    combustion_temperature, metering_temperature, wobbe_combustion_temperature [K]
    metering_pressure [Pa]
    status : ndarray of uint32, shape (...), or None
        :class:`models.status.Reason` bits per batch element (``FUEL_INVALID``,
        ``INPUT_MISSING``); non-zero only with ``gas_fuel(..., on_invalid="nan")``, where the
        flagged elements carry NaN properties.  None means "all valid".
    """

    kind: Literal["gas", "liquid"]
    molar_mass: FloatArray
    lhv: FloatArray
    hhv: FloatArray
    lhv_molar: FloatArray
    hhv_molar: FloatArray
    wobbe_index: FloatArray
    relative_density: FloatArray
    compression_factor: FloatArray
    stoichiometric_air: FloatArray
    carbon_mass_fraction: FloatArray
    hydrogen_mass_fraction: FloatArray
    sulfur_mass_fraction: FloatArray
    product_delta: FloatArray
    composition: FloatArray | None
    liquid_cp: FloatArray
    combustion_temperature: float = REFERENCE_TEMPERATURE
    metering_temperature: float = 288.15
    metering_pressure: float = 101325.0
    wobbe_combustion_temperature: float = 288.15
    status: StatusArray | None = None

    @property
    def shape(self) -> tuple[int, ...]:
        """Batch shape."""
        return self.lhv.shape

    def sensible_enthalpy(self, T: ArrayLike) -> FloatArray:
        """Sensible enthalpy of the fuel as supplied, relative to 298.15 K.

        Parameters
        ----------
        T : array_like [K]  fuel temperature, broadcast against the batch shape.

        Returns
        -------
        ndarray [J/kg]

        Notes
        -----
        Gas: ideal-gas mixture of the fuel's species, ``models.properties.mixtures.Mixture`` (NASA
        polynomial data), h(T) − h(298.15 K).  Liquid: ``liquid_cp · (T − 298.15 K)``.
        """
        T_arr = np.asarray(T, dtype=np.float64)
        if self.kind == "liquid" or self.composition is None:
            return np.asarray(self.liquid_cp * (T_arr - REFERENCE_TEMPERATURE), dtype=np.float64)
        x = self.composition
        y = x * SPECIES_MOLAR_MASS
        y = y / np.sum(y, axis=-1, keepdims=True)
        if y.ndim == 1:
            # a single fuel: evaluate as a batch of one, then drop that axis again
            out = np.asarray(mixtures.Mixture.from_mass_fractions(y[None, :]).h(T_arr[..., None]))
            return np.asarray(out[..., 0], dtype=np.float64)
        return np.asarray(mixtures.Mixture.from_mass_fractions(y).h(T_arr), dtype=np.float64)


def stoichiometric_air_ratio(
    fuel: FuelProperties, air_mass_fractions: Mapping[str, float] | ArrayLike
) -> FloatArray:
    r"""Stoichiometric air of ``fuel`` for an air of given composition [kg air / kg fuel].

    Parameters
    ----------
    fuel : FuelProperties
    air_mass_fractions : mapping species -> mass fraction, or array (..., N_SPECIES)
        Composition of the (possibly humid) air; only its O2 mass fraction matters.

    Returns
    -------
    ndarray [kg/kg]  ``-product_delta[..., O2] / y_O2,air``

    Notes
    -----
    .. math::

        A_{st} = \frac{\nu_{O_2}}{y_{O_2,air}}

    References
    ----------
    .. [1] ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative
       density and Wobbe indices from composition, clause 5 (composition); complete combustion
       (common practice).
    """
    if isinstance(air_mass_fractions, Mapping):
        y_o2 = np.asarray(air_mass_fractions["O2"], dtype=np.float64)
    else:
        y_o2 = np.asarray(air_mass_fractions, dtype=np.float64)[..., INDEX["O2"]]
    if np.any(~(y_o2 > 0.0)) or np.any(y_o2 > 1.0):
        raise ModelInputError("air_mass_fractions['O2']", y_o2, "0 < y_O2 <= 1")
    return np.asarray(-fuel.product_delta[..., INDEX["O2"]] / y_o2, dtype=np.float64)


# --------------------------------------------------------------------------------------------
def _composition(
    composition: Mapping[str, float | ArrayLike],
    allowed: tuple[str, ...],
    who: str,
    on_invalid: OnInvalid = "raise",
) -> tuple[tuple[str, ...], FloatArray, StatusArray]:
    """Validate and normalise a composition; return (names, x[..., k], status[...]).

    With ``on_invalid="nan"`` bad batch elements become NaN rows with a status bit
    (INPUT_MISSING for NaN, FUEL_INVALID for out-of-range values or sums); unknown species and
    unbroadcastable shapes always raise (they are configuration errors, not plant data).
    """
    if on_invalid not in ("raise", "nan"):
        raise ModelInputError("on_invalid", on_invalid, "'raise' or 'nan'")
    if not isinstance(composition, Mapping) or len(composition) == 0:
        raise ModelInputError(
            "composition", composition, "a non-empty mapping species -> mole fraction"
        )
    names: list[str] = []
    values: list[FloatArray] = []
    for key, val in composition.items():
        if key not in allowed:
            hint = ""
            if key in ISO6976_COMPONENTS:
                hint = "accepted by iso6976() but has no ideal-gas data for gas_fuel()"
            raise ModelInputError(
                f"composition[{key!r}]", val, f"{who} accepts {', '.join(allowed)}", hint
            )
        arr = np.asarray(val, dtype=np.float64)
        if on_invalid == "raise" and (
            not np.all(np.isfinite(arr)) or np.any(arr < 0.0) or np.any(arr > 1.0 + 1e-12)
        ):
            raise ModelInputError(
                f"composition[{key!r}]", val, "a finite mole fraction 0 to 1 [mol/mol]"
            )
        names.append(key)
        values.append(arr)
    try:
        stacked = np.stack(np.broadcast_arrays(*values), axis=-1)
    except ValueError as exc:
        raise ModelInputError(
            "composition", {k: np.shape(v) for k, v in composition.items()},
            "values of broadcastable shapes", str(exc),
        ) from exc  # fmt: skip
    total = np.sum(stacked, axis=-1)
    missing = np.any(np.isnan(stacked), axis=-1)
    with np.errstate(invalid="ignore"):
        out_of_range = np.any((stacked < 0.0) | (stacked > 1.0 + 1e-12), axis=-1)
        off_sum = np.abs(total - 1.0) > _COMPOSITION_TOL
    invalid = ~missing & (out_of_range | off_sum)
    if on_invalid == "raise" and np.any(invalid):
        raise ModelInputError(
            "sum(composition)",
            total[invalid].tolist() if total.ndim else float(total),
            f"1 ± {_COMPOSITION_TOL:g} (mole fractions, not percent)",
        )
    status = np.zeros(total.shape, dtype=np.uint32)
    status[missing] |= np.uint32(Reason.INPUT_MISSING)
    status[invalid] |= np.uint32(Reason.FUEL_INVALID)
    with np.errstate(invalid="ignore", divide="ignore"):
        x = stacked / total[..., None]
    x[(missing | invalid)] = np.nan
    return tuple(names), x, status


def _check_temperature_C(name: str, t_C: float, column: int | None, valid: tuple[float, ...],
                         offset: float) -> int:  # fmt: skip
    if column is None:
        shown = ", ".join(f"{t + offset:g}" for t in valid)
        unit = "K" if offset else "°C"
        raise ModelInputError(name, t_C + offset, f"one of {shown} {unit} (ISO 6976:2016 tables)")
    return column


def _check_pressure(pressure: float) -> float:
    p = float(pressure)
    if not 90e3 <= p <= 110e3:
        raise ModelInputError(
            "pressure", pressure, "90 000 to 110 000 Pa (ISO 6976:2016 range of application)"
        )
    return p


def _iso_core(
    names: tuple[str, ...], x: FloatArray, *, kc: int, km: int, p: float, t_m_C: float
) -> dict[str, FloatArray]:
    M_i = iso.molar_mass(names)
    M = x @ M_i
    gross = x @ iso.gross_molar(names, kc)
    n_H = x @ iso.atoms(names)[:, 1]
    net = gross - 0.5 * n_H * iso.enthalpy_of_vaporization(kc)
    s = x @ iso.summation_factor(names, km)
    Z = 1.0 - (p / iso.P0) * s**2
    Z_air = 1.0 - (p / iso.P0) * (1.0 - iso.z_air(km))
    T_m = t_m_C + 273.15
    V_ideal = iso.R * T_m / p  # m^3/mol
    V = Z * V_ideal
    G_ideal = M / iso.M_AIR
    G = G_ideal * Z_air / Z
    return {
        "molar_mass": M,
        "compression_factor": Z,
        "gross_molar": gross,
        "net_molar": net,
        "gross_mass": gross / M,
        "net_mass": net / M,
        "gross_volumetric_ideal": gross / V_ideal,
        "net_volumetric_ideal": net / V_ideal,
        "gross_volumetric": gross / V,
        "net_volumetric": net / V,
        "density_ideal": M / V_ideal,
        "density": M / V,
        "relative_density_ideal": G_ideal,
        "relative_density": G,
        "wobbe_gross_ideal": gross / V_ideal / np.sqrt(G_ideal),
        "wobbe_net_ideal": net / V_ideal / np.sqrt(G_ideal),
        "wobbe_gross": gross / V / np.sqrt(G),
        "wobbe_net": net / V / np.sqrt(G),
    }


def iso6976(
    composition: Mapping[str, float | ArrayLike],
    *,
    combustion_temperature_C: float = 15.0,
    metering_temperature_C: float = 15.0,
    pressure: float = 101325.0,
) -> dict[str, FloatArray]:
    r"""Calorific values, density, relative density and Wobbe indices per ISO 6976:2016.

    Parameters
    ----------
    composition : mapping name -> mole fraction [mol/mol] (float or array over a batch)
        Keys from :data:`ISO6976_COMPONENTS`.  Must sum to 1 within 1e-4 (then normalised).
    combustion_temperature_C : float [°C]  0, 15, 15.55, 20 or 25.
    metering_temperature_C : float [°C]  0, 15, 15.55 or 20.
    pressure : float [Pa]  metering pressure, 90 to 110 kPa.

    Returns
    -------
    dict of ndarray
        ``molar_mass`` [kg/mol], ``compression_factor`` [-], ``gross_molar``/``net_molar``
        [J/mol], ``gross_mass``/``net_mass`` [J/kg], ``gross_volumetric``/``net_volumetric``
        [J/m^3] (real gas; ``*_ideal`` ideal gas), ``density``/``density_ideal`` [kg/m^3],
        ``relative_density``/``relative_density_ideal`` [-], ``wobbe_gross``/``wobbe_net``
        [J/m^3] (real gas; ``*_ideal`` ideal gas).

    Notes
    -----
    .. math::

        H_{c,G} = \sum_i x_i H_{c,G,i}, \quad H_{c,N} = H_{c,G} - \frac{\sum_i x_i b_i}{2} L^\circ,
        \quad Z = 1 - \frac{p_2}{p_0} \left(\sum_i x_i s_i\right)^2, \quad W = \frac{H_v}{\sqrt{G}}

    With mole fractions x_i (ISO 6976:2016 clauses 5 to 9):

    * M = Σ x_i M_i;  Z(t2, p2) = 1 − (p2/p0) (Σ x_i s_i(t2))², p0 = 101.325 kPa
    * Hc,G(t1) = Σ x_i Hc,G,i(t1);  Hc,N = Hc,G − (Σ x_i b_i / 2) L°(t1), b_i = H atoms
    * Hm = Hc / M;  Hv = Hc p2 / (R T2 Z),  R = 8.3144621 J/(mol K)
    * G = (M / M_air) Z_air(t2, p2) / Z,  Z_air(p2) = 1 − (p2/p0)(1 − Z_air(p0))
    * W = Hv / √G

    References
    ----------
    ISO 6976:2016, Natural gas — Calculation of calorific values, density, relative density
    and Wobbe indices from composition.  International Organization for Standardization.

    Examples
    --------
    Annex D, Example 1 of the standard (15 °C / 15 °C):

    >>> r = iso6976({"CH4": 0.933212, "C2H6": 0.025656, "C3H8": 0.015368,
    ...              "N2": 0.010350, "CO2": 0.015414})
    >>> print(f"{r['gross_molar'] / 1e3:.7f} kJ/mol, Z = {r['compression_factor']:.8f}")
    906.1799588 kJ/mol, Z = 0.99776224
    """
    names, x, _ = _composition(composition, ISO6976_COMPONENTS, "iso6976()")
    kc = _check_temperature_C(
        "combustion_temperature_C",
        combustion_temperature_C,
        iso.combustion_column(combustion_temperature_C),
        iso.COMBUSTION_TEMPERATURES_C,
        0.0,
    )
    km = _check_temperature_C(
        "metering_temperature_C",
        metering_temperature_C,
        iso.metering_column(metering_temperature_C),
        iso.METERING_TEMPERATURES_C,
        0.0,
    )
    p = _check_pressure(pressure)
    t_m = iso.METERING_TEMPERATURES_C[km]
    return _iso_core(names, x, kc=kc, km=km, p=p, t_m_C=t_m)


def _products_per_mol(names: tuple[str, ...], x: FloatArray) -> FloatArray:
    """Species change [mol per mol fuel], shape (..., N_SPECIES), complete combustion."""
    a = iso.atoms(names)  # C H N O S He Ar
    n = x @ a  # atoms per mol of fuel, (..., 7)
    nC, nH, nN, nO, nS, nHe, nAr = (n[..., j] for j in range(7))
    d = np.zeros((*x.shape[:-1], N_SPECIES))
    d[..., INDEX["CO2"]] = nC
    d[..., INDEX["H2O"]] = 0.5 * nH
    d[..., INDEX["SO2"]] = nS
    d[..., INDEX["N2"]] = 0.5 * nN
    d[..., INDEX["Ar"]] = nAr
    d[..., INDEX["He"]] = nHe
    d[..., INDEX["O2"]] = -(nC + 0.25 * nH + nS - 0.5 * nO)
    return d


def gas_fuel(
    composition: Mapping[str, float | ArrayLike],
    *,
    combustion_temperature: float = REFERENCE_TEMPERATURE,
    metering_temperature: float = 288.15,
    metering_pressure: float = 101325.0,
    wobbe_combustion_temperature: float = 288.15,
    on_invalid: OnInvalid = "raise",
) -> FuelProperties:
    r"""Properties of a gaseous fuel from its molar composition (ISO 6976:2016).

    Parameters
    ----------
    composition : mapping species -> mole fraction [mol/mol] (float or array over a batch)
        Keys from :data:`GAS_COMPONENTS`; sum 1 within 1e-4 (then normalised silently).
    combustion_temperature : float [K]
        Reference of ``lhv``/``hhv``: 273.15, 288.15, 288.70, 293.15 or 298.15 (default, 25 °C).
    metering_temperature : float [K]
        Reference of Z, relative density and Wobbe index: 273.15, 288.15 (default), 288.70,
        293.15.
    metering_pressure : float [Pa]  90 to 110 kPa (default 101 325 Pa).
    wobbe_combustion_temperature : float [K]  combustion reference of the Wobbe index
        (default 288.15 K, i.e. the ISO "15 °C/15 °C" Wobbe index).
    on_invalid : {"raise", "nan"}
        "raise" (default): any NaN, negative, > 1 or off-sum element raises ModelInputError.
        "nan": such batch elements get NaN properties and a ``status`` bit (INPUT_MISSING /
        FUEL_INVALID) so one bad analyser reading never hides the rest of the batch.  Unknown
        species and bad reference conditions raise either way.

    Returns
    -------
    FuelProperties

    Notes
    -----
    .. math::

        \nu_{O_2} = \sum_i x_i \left(c_i + \frac{h_i}{4} + s_i - \frac{o_i}{2}\right), \qquad
        A_{st} = \frac{\nu_{O_2} M_{O_2} / M}{y_{O_2,air}}

    Heating values per :func:`iso6976`.  Complete combustion: C → CO2, H → H2O, S → SO2,
    N → N2; Ar, He pass through; O2 demand per mol fuel = Σ x_i (c_i + h_i/4 + s_i − o_i/2).
    ``stoichiometric_air`` = O2 demand [kg/kg] / y_O2 of :data:`STANDARD_DRY_AIR`.

    References
    ----------
    ISO 6976:2016 (see :func:`iso6976`).

    Examples
    --------
    >>> f = gas_fuel({"CH4": 0.95, "C2H6": 0.03, "N2": 0.02})
    >>> print(f"{f.lhv / 1e6:.2f} MJ/kg, air {f.stoichiometric_air:.2f} kg/kg")
    48.21 MJ/kg, air 16.61 kg/kg
    """
    names, x, status = _composition(composition, GAS_COMPONENTS, "gas_fuel()", on_invalid)
    temps = {
        "combustion_temperature": (combustion_temperature, iso.COMBUSTION_TEMPERATURES_C),
        "wobbe_combustion_temperature": (
            wobbe_combustion_temperature,
            iso.COMBUSTION_TEMPERATURES_C,
        ),
        "metering_temperature": (metering_temperature, iso.METERING_TEMPERATURES_C),
    }
    cols: dict[str, int] = {}
    for key, (T, valid) in temps.items():
        t_C = float(T) - 273.15
        col = (
            iso.metering_column(t_C)
            if key == "metering_temperature"
            else iso.combustion_column(t_C)
        )
        cols[key] = _check_temperature_C(key, t_C, col, valid, 273.15)
    p = _check_pressure(metering_pressure)
    t_m_C = iso.METERING_TEMPERATURES_C[cols["metering_temperature"]]
    km = cols["metering_temperature"]
    r = _iso_core(names, x, kc=cols["combustion_temperature"], km=km, p=p, t_m_C=t_m_C)
    wobbe = _iso_core(names, x, kc=cols["wobbe_combustion_temperature"], km=km, p=p, t_m_C=t_m_C)[
        "wobbe_gross"
    ]

    M = r["molar_mass"]
    d_mol = _products_per_mol(names, x)
    product_delta = d_mol * SPECIES_MOLAR_MASS / M[..., None]
    full = np.zeros((*x.shape[:-1], N_SPECIES))
    for j, name in enumerate(names):
        full[..., INDEX[name]] = x[..., j]
    n_atoms = x @ iso.atoms(names)
    nan = np.full(M.shape, np.nan)
    return FuelProperties(
        kind="gas",
        molar_mass=M,
        lhv=r["net_mass"],
        hhv=r["gross_mass"],
        lhv_molar=r["net_molar"],
        hhv_molar=r["gross_molar"],
        wobbe_index=wobbe,
        relative_density=r["relative_density"],
        compression_factor=r["compression_factor"],
        stoichiometric_air=-product_delta[..., INDEX["O2"]] / _Y_O2_STD_AIR,
        carbon_mass_fraction=n_atoms[..., 0] * _M_C / M,
        hydrogen_mass_fraction=n_atoms[..., 1] * _M_H / M,
        sulfur_mass_fraction=n_atoms[..., 4] * _M_S / M,
        product_delta=product_delta,
        composition=full,
        liquid_cp=nan,
        combustion_temperature=float(combustion_temperature),
        metering_temperature=float(metering_temperature),
        metering_pressure=p,
        wobbe_combustion_temperature=float(wobbe_combustion_temperature),
        status=status,
    )


def liquid_fuel(  # noqa: PLR0917 (positional order is the published API)
    lower_heating_value: ArrayLike,
    carbon_mass_fraction: ArrayLike,
    hydrogen_mass_fraction: ArrayLike,
    sulfur_mass_fraction: ArrayLike = 0.0,
    higher_heating_value: ArrayLike | None = None,
    liquid_cp: ArrayLike = 2000.0,
    *,
    oxygen_mass_fraction: ArrayLike = 0.0,
) -> FuelProperties:
    r"""Properties of a liquid fuel from its heating value and elemental analysis.

    Parameters
    ----------
    lower_heating_value : array_like [J/kg]  net heating value at 25 °C, > 0.
    carbon_mass_fraction, hydrogen_mass_fraction, sulfur_mass_fraction : array_like [-]
        Elemental mass fractions, each in [0, 1], C + H + S (+ O) <= 1.
    higher_heating_value : array_like [J/kg], optional
        Gross heating value; if omitted, LHV + (water formed) · L°(25 °C).
    liquid_cp : array_like [J/(kg K)]  specific heat of the liquid (default 2000).
    oxygen_mass_fraction : array_like [-]  fuel-bound oxygen (e.g. biodiesel), default 0.

    Returns
    -------
    FuelProperties  (molar and volumetric quantities NaN)

    Notes
    -----
    .. math::

        HHV = LHV + 8.937\, w_H\, L^\circ(25\,^\circ C), \qquad
        \nu_{O_2} = M_{O_2} \left(\frac{w_C}{M_C} + \frac{w_H}{4 M_H} + \frac{w_S}{M_S}
            - \frac{w_O}{2 M_O}\right)

    Water formed [kg/kg fuel] = w_H · M_H2O / (2 M_H) = 8.937 w_H (≈ 9 w_H);
    HHV = LHV + 8.937 w_H · L°(25 °C) with L° = 2443.1 kJ/kg (:data:`LATENT_HEAT_WATER_25C`).
    O2 demand [kg/kg] = M_O2 (w_C/M_C + w_H/(4 M_H) + w_S/M_S − w_O/(2 M_O)).
    Mass not accounted for by C, H, S, O (1 − Σ w) is carried to the products as N2 (inert),
    so ``product_delta`` sums to 1; ash is not modelled.

    References
    ----------
    ISO 6976:2016 for L°(25 °C) = 44.013 kJ/mol.
    """
    lhv = np.asarray(lower_heating_value, dtype=np.float64)
    fr = {
        "carbon_mass_fraction": np.asarray(carbon_mass_fraction, dtype=np.float64),
        "hydrogen_mass_fraction": np.asarray(hydrogen_mass_fraction, dtype=np.float64),
        "sulfur_mass_fraction": np.asarray(sulfur_mass_fraction, dtype=np.float64),
        "oxygen_mass_fraction": np.asarray(oxygen_mass_fraction, dtype=np.float64),
    }
    if np.any(~(lhv > 0.0)) or not np.all(np.isfinite(lhv)):
        raise ModelInputError("lower_heating_value", lower_heating_value, "> 0 J/kg, finite")
    for key, v in fr.items():
        if np.any(~((v >= 0.0) & (v <= 1.0))):
            raise ModelInputError(key, v, "0 to 1 [kg/kg]")
    total = fr["carbon_mass_fraction"] + fr["hydrogen_mass_fraction"]
    total = total + fr["sulfur_mass_fraction"] + fr["oxygen_mass_fraction"]
    if np.any(total > 1.0 + 1e-9):
        raise ModelInputError(
            "carbon + hydrogen + sulfur (+ oxygen) mass fraction", total, "<= 1 [kg/kg]"
        )
    cp = np.asarray(liquid_cp, dtype=np.float64)
    if np.any(~(cp > 0.0)):
        raise ModelInputError("liquid_cp", liquid_cp, "> 0 J/(kg K)")
    shape = np.broadcast_shapes(lhv.shape, cp.shape, *(v.shape for v in fr.values()))
    if higher_heating_value is not None:
        shape = np.broadcast_shapes(shape, np.shape(higher_heating_value))
    lhv, cp = np.broadcast_to(lhv, shape), np.broadcast_to(cp, shape)
    wC, wH, wS, wO = (np.broadcast_to(v, shape) for v in fr.values())
    rest = np.clip(1.0 - (wC + wH + wS + wO), 0.0, None)

    M = SPECIES_MOLAR_MASS
    water = wH / (2.0 * _M_H) * M[INDEX["H2O"]]
    if higher_heating_value is None:
        hhv = lhv + water * LATENT_HEAT_WATER_25C
    else:
        hhv = np.broadcast_to(np.asarray(higher_heating_value, dtype=np.float64), shape)
        if np.any(~(hhv >= lhv)):
            raise ModelInputError(
                "higher_heating_value", higher_heating_value, ">= lower_heating_value [J/kg]"
            )
    delta = np.zeros((*shape, N_SPECIES))
    delta[..., INDEX["CO2"]] = wC / _M_C * M[INDEX["CO2"]]
    delta[..., INDEX["H2O"]] = water
    delta[..., INDEX["SO2"]] = wS / _M_S * M[INDEX["SO2"]]
    delta[..., INDEX["N2"]] = rest
    delta[..., INDEX["O2"]] = (
        -(wC / _M_C + wH / (4 * _M_H) + wS / _M_S - wO / (2 * _M_O)) * (M[INDEX["O2"]])
    )
    nan = np.full(shape, np.nan)
    return FuelProperties(
        kind="liquid",
        molar_mass=nan,
        lhv=np.array(lhv, dtype=np.float64),
        hhv=np.array(hhv, dtype=np.float64),
        lhv_molar=nan,
        hhv_molar=nan,
        wobbe_index=nan,
        relative_density=nan,
        compression_factor=nan,
        stoichiometric_air=-delta[..., INDEX["O2"]] / _Y_O2_STD_AIR,
        carbon_mass_fraction=np.array(wC, dtype=np.float64),
        hydrogen_mass_fraction=np.array(wH, dtype=np.float64),
        sulfur_mass_fraction=np.array(wS, dtype=np.float64),
        product_delta=delta,
        composition=None,
        liquid_cp=np.array(cp, dtype=np.float64),
        status=np.zeros(shape, dtype=np.uint32),
    )

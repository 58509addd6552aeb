"""Reciprocating engines: geometry, brake figures, stoichiometry, charge air, heat recovery.

Length (about 1200 lines, above the project's 600): every engine-set component figure
shares the engine geometry and one set of element-wise input checks; split by figure
(geometry, stoichiometry, charge air, heat recovery) when the gas-engine and Diesel unit
types are wired.

Also the turbocharger compressor and the cut-off ratio from the fuel per cycle.

Everything is SI: m, m3, kg, s, K, Pa (absolute), W, J/kg; engine speed is an angular speed
in rad/s (rpm = 60 / (2 pi) x value; convert at the tag map, once).  The trade's display units
are reached by one factor each: :data:`BSFC_G_PER_KWH` (kg/J -> g/kWh),
:data:`HEAT_RATE_KJ_PER_KWH` (J/J -> kJ/kWh), 1e-5 (Pa -> bar).

Equations (numbers cited in the function docstrings)::

    V_s  = pi/4 B^2 S,   V_d = z V_s,   V_c = V_s / (r - 1)                        (1)
    n    = omega / (2 pi)  [rev/s],   n_cyc = n / n_R,  n_R = strokes / 2          (2)
    c_m  = 2 S n  (mean piston speed)                                               (3)
    s(theta) = a + l - (a cos theta + sqrt(l^2 - a^2 sin^2 theta)),  a = S/2       (4)
    P_b  = P_gen / eta_gen + P_mech,   T_b = P_b / omega                            (5)
    eta_b = P_b / (m_f LHV),  HR_b = m_f LHV / P_b,  bsfc = m_f / P_b               (6)
    bmep = P_b / (V_d n_cyc)                                                        (7)
    lambda = m_a / (m_f A_st),   AFR = lambda A_st                                  (8)
    x_O2 = (lambda - 1) c / (lambda a + b)   (complete, lean combustion)            (9)
    eta_v = m_ch / (rho_rec V_d n_cyc),  rho_rec = p_rec / (Z R T_rec)              (10)
    eta_CHP = (P_gen + Q_jw + Q_lo + Q_cac + Q_exh) / (m_f LHV)                    (11)
    q_in = eta_comb m_f,cyc LHV / m_ch,cyc  (heat per kg of trapped charge)        (12)

Advisory monitoring only: not a protection or control system.  Follow the manufacturer's
limits, site procedures, local codes and licensed engineers.

References
----------
.. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill, 2018,
   ch. 2 (engine design and operating parameters: geometry, brake power, mean effective
   pressure, specific fuel consumption, air-fuel ratio, volumetric efficiency) and ch. 4
   (combustion stoichiometry, exhaust composition).
.. [2] ISO 3046-1:2002, Reciprocating internal combustion engines — Performance — Part 1
   (definitions of power, fuel consumption and specific fuel consumption).
.. [3] H. I. H. Saravanamuttoo et al., *Gas Turbine Theory*, 7th ed., 2017, section 2.1
   (compressor isentropic efficiency, as used for the turbocharger compressor).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.components import generator
from models.components.compressor import CompressorState, compressor
from models.cycles.reciprocating import (
    GAMMA_AIR,
    R_DRY_AIR,
    ReciprocatingCycle,
    diesel_cycle,
    dual_cycle,
    otto_cycle,
)
from models.properties import humid_air, mixtures
from models.properties.fuel import FuelProperties
from models.properties.species import INDEX, SPECIES
from models.status import ModelInputError, Reason, flag

__all__ = [
    "BRAKE_EFFICIENCY_BAND",
    "BSFC_G_PER_KWH",
    "HEAT_RATE_KJ_PER_KWH",
    "TURBOCHARGER_EFFICIENCY_BAND",
    "BrakePerformance",
    "ChpEfficiency",
    "EngineGeometry",
    "brake_performance",
    "charge_density",
    "chp_efficiency",
    "cycle_from_fuel",
    "dry_air",
    "estimate_cutoff_ratio",
    "excess_air_ratio_from_air_flow",
    "excess_air_ratio_from_oxygen",
    "exhaust_heat",
    "exhaust_oxygen",
    "heat_input_per_charge",
    "relative_efficiency",
    "turbocharger_compressor",
    "volumetric_efficiency",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]
OxygenBasis = Literal["dry", "wet"]

#: Brake specific fuel consumption: kg/J -> g/kWh (1 kWh = 3.6e6 J, 1 kg = 1e3 g).
BSFC_G_PER_KWH: float = 3.6e9
#: Heat rate: J/J -> kJ/kWh.
HEAT_RATE_KJ_PER_KWH: float = 3600.0
#: Plausible brake thermal efficiency [-] of stationary engines from small Diesel gensets at
#: part load to large gas engines at full load (large gas engines 0.40-0.49, common
#: practice); outside it ``EFFICIENCY_IMPLAUSIBLE`` is set as a warning.
BRAKE_EFFICIENCY_BAND: tuple[float, float] = (0.20, 0.52)
#: Plausible isentropic efficiency [-] of a turbocharger's radial compressor in service
#: (common practice: 0.75-0.85 near design, lower off design); warning outside.
TURBOCHARGER_EFFICIENCY_BAND: tuple[float, float] = (0.60, 0.88)


Check = Literal["pos", "nonneg", "frac", "any"]


def _inputs(
    *specs: tuple[ArrayLike, Check], shape: tuple[int, ...] | None = None
) -> tuple[list[FloatArray], StatusArray]:
    """Broadcast inputs and flag them.

    NaN -> INPUT_MISSING; 'pos' needs > 0, 'nonneg' >= 0,
    'frac' 0 < x <= 1 (EFFICIENCY_OUT_OF_RANGE), else INPUT_NONPHYSICAL.  Flagged elements are
    replaced by 1.0 so downstream arithmetic stays quiet; mask the results with the status.
    """
    arrs = [np.asarray(v, dtype=np.float64) for v, _ in specs]
    full = np.broadcast_shapes(*(a.shape for a in arrs), *(() if shape is None else (shape,)))
    status = np.zeros(full, dtype=np.uint32)
    out: list[FloatArray] = []
    for a, (_, kind) in zip(arrs, specs, strict=True):
        b = np.broadcast_to(a, full)
        miss = np.isnan(b)
        with np.errstate(invalid="ignore"):
            if kind == "pos":
                ok = b > 0.0
            elif kind == "nonneg":
                ok = b >= 0.0
            elif kind == "frac":
                ok = (b > 0.0) & (b <= 1.0)
            else:
                ok = np.isfinite(b)
        flag(status, miss, Reason.INPUT_MISSING)
        reason = Reason.EFFICIENCY_OUT_OF_RANGE if kind == "frac" else Reason.INPUT_NONPHYSICAL
        flag(status, ~miss & ~ok, reason)
        out.append(np.where(miss | ~ok, 1.0, b))
    return out, status


def _nan(a: ArrayLike, status: StatusArray, allowed: Reason = Reason.OK) -> FloatArray:
    bad = (status & ~np.uint32(allowed)) != 0
    arr = np.broadcast_to(np.asarray(a, dtype=np.float64), status.shape)
    return np.where(bad, np.nan, arr)


# --------------------------------------------------------------------------------------------
# Geometry
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class EngineGeometry:
    """Geometry of a reciprocating engine (unit parameters; scalars).

    Parameters
    ----------
    bore : float
        Cylinder bore B [m], > 0.
    stroke : float
        Piston stroke S [m], > 0.
    connecting_rod_length : float
        Connecting-rod length l between the centres [m], > S/2.
    cylinders : int
        Number of cylinders z [-], >= 1.
    compression_ratio : float
        r = (V_s + V_c) / V_c [-], > 1.
    strokes_per_cycle : int
        4 (four-stroke) or 2 (two-stroke) [-].

    Raises
    ------
    ModelInputError
        Any parameter outside its range (configuration error).

    Notes
    -----
    Equations (1)-(4) of the module; Heywood (2018), section 2.2 [1]_.

    Examples
    --------
    An invented 20-cylinder gas engine (bore 210 mm, stroke 240 mm, rod 480 mm, r = 12.5),
    like the Kestrel Ridge block KR-GE1:

    >>> g = EngineGeometry(0.21, 0.24, 0.48, 20, 12.5)
    >>> round(g.swept_volume * 1e3, 3), round(g.displacement * 1e3, 1)
    (8.313, 166.3)
    >>> round(float(g.mean_piston_speed(1500 * 2 * math.pi / 60)), 1)
    12.0
    """

    bore: float
    stroke: float
    connecting_rod_length: float
    cylinders: int
    compression_ratio: float
    strokes_per_cycle: int = 4

    def __post_init__(self) -> None:
        """Check the geometry (raises ModelInputError)."""
        for name in ("bore", "stroke"):
            v = getattr(self, name)
            if not (isinstance(v, int | float) and math.isfinite(v) and v > 0):
                raise ModelInputError(name, v, "> 0 m")
        rod = self.connecting_rod_length
        if not (isinstance(rod, int | float) and rod > self.stroke / 2):
            raise ModelInputError("connecting_rod_length", rod, f"> stroke/2 = {self.stroke / 2} m")
        if not (isinstance(self.cylinders, int) and self.cylinders >= 1):
            raise ModelInputError("cylinders", self.cylinders, "an integer >= 1")
        r = self.compression_ratio
        if not (isinstance(r, int | float) and math.isfinite(r) and r > 1):
            raise ModelInputError("compression_ratio", r, "> 1")
        if self.strokes_per_cycle not in (2, 4):
            raise ModelInputError("strokes_per_cycle", self.strokes_per_cycle, "2 or 4")

    @classmethod
    def from_clearance_volume(
        cls,
        bore: float,
        stroke: float,
        connecting_rod_length: float,
        cylinders: int,
        *,
        clearance_volume: float,
        strokes_per_cycle: int = 4,
    ) -> EngineGeometry:
        """Geometry from the clearance volume V_c per cylinder [m3] instead of r (eq. 1)."""
        if not (isinstance(clearance_volume, int | float) and clearance_volume > 0):
            raise ModelInputError("clearance_volume", clearance_volume, "> 0 m3")
        vs = math.pi / 4 * bore**2 * stroke
        return cls(
            bore,
            stroke,
            connecting_rod_length,
            cylinders,
            (vs + clearance_volume) / clearance_volume,
            strokes_per_cycle,
        )

    @property
    def swept_volume(self) -> float:
        """Swept volume per cylinder V_s = pi/4 B^2 S [m3]."""
        return math.pi / 4 * self.bore**2 * self.stroke

    @property
    def displacement(self) -> float:
        """Total displacement V_d = z V_s [m3]."""
        return self.cylinders * self.swept_volume

    @property
    def clearance_volume(self) -> float:
        """Clearance volume per cylinder V_c = V_s / (r - 1) [m3]."""
        return self.swept_volume / (self.compression_ratio - 1.0)

    @property
    def revolutions_per_cycle(self) -> int:
        """n_R: crank revolutions per working cycle [-] (2 for four-stroke, 1 for two)."""
        return self.strokes_per_cycle // 2

    def cycles_per_second(self, engine_speed: ArrayLike) -> FloatArray:
        """Return the working cycles per second of one cylinder, n / n_R [1/s] (eq. 2).

        ``engine_speed`` in [rad/s].
        """
        return np.asarray(
            np.asarray(engine_speed, dtype=np.float64) / (2 * math.pi) / self.revolutions_per_cycle,
            dtype=np.float64,
        )

    def mean_piston_speed(self, engine_speed: ArrayLike) -> FloatArray:
        """Mean piston speed c_m = 2 S n [m/s] (eq. 3) at ``engine_speed`` [rad/s]."""
        n = np.asarray(engine_speed, dtype=np.float64) / (2 * math.pi)
        return np.asarray(2.0 * self.stroke * n, dtype=np.float64)

    def piston_position(self, crank_angle: ArrayLike) -> FloatArray:
        """Piston distance below TDC s(theta) [m] (eq. 4); crank angle [rad] from TDC."""
        th = np.asarray(crank_angle, dtype=np.float64)
        a = self.stroke / 2
        lr = self.connecting_rod_length
        s = a + lr - (a * np.cos(th) + np.sqrt(lr**2 - (a * np.sin(th)) ** 2))
        return np.asarray(s, dtype=np.float64)

    def cylinder_volume(self, crank_angle: ArrayLike) -> FloatArray:
        """Cylinder volume V(theta) = V_c + (pi/4) B^2 s(theta) [m3]; crank angle [rad]."""
        return np.asarray(
            self.clearance_volume + math.pi / 4 * self.bore**2 * self.piston_position(crank_angle),
            dtype=np.float64,
        )


# --------------------------------------------------------------------------------------------
# Brake figures
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class BrakePerformance:
    """Brake figures of :func:`brake_performance` (arrays of one shape, NaN on error).

    Attributes
    ----------
    brake_power : P_b [W]
    brake_torque : P_b / omega [N m]
    brake_thermal_efficiency : P_b / (m_f LHV) [-]
    brake_heat_rate : m_f LHV / P_b [J/J]; x :data:`HEAT_RATE_KJ_PER_KWH` for kJ/kWh
    brake_specific_fuel_consumption : m_f / P_b [kg/J]; x :data:`BSFC_G_PER_KWH` for g/kWh
    brake_mean_effective_pressure : P_b / (V_d n_cyc) [Pa]
    mean_piston_speed : 2 S n [m/s]
    status : Reason bits
    """

    brake_power: FloatArray
    brake_torque: FloatArray
    brake_thermal_efficiency: FloatArray
    brake_heat_rate: FloatArray
    brake_specific_fuel_consumption: FloatArray
    brake_mean_effective_pressure: FloatArray
    mean_piston_speed: FloatArray
    status: StatusArray


def brake_performance(
    geometry: EngineGeometry,
    generator_power: ArrayLike,
    fuel_mass_flow: ArrayLike,
    engine_speed: ArrayLike,
    lower_heating_value: ArrayLike,
    *,
    generator_efficiency: ArrayLike = 1.0,
    mechanical_loss: ArrayLike = 0.0,
) -> BrakePerformance:
    r"""Brake power, efficiency, heat rate, specific fuel consumption and BMEP.

    Parameters
    ----------
    geometry : EngineGeometry
    generator_power : array_like
        Generator terminal power P_gen [W], > 0 (pass the shaft power with
        ``generator_efficiency=1`` when it is measured by torque).
    fuel_mass_flow : array_like
        m_f [kg/s], > 0.
    engine_speed : array_like
        Engine speed omega [rad/s], > 0.
    lower_heating_value : array_like
        LHV of the fuel [J/kg], > 0.
    generator_efficiency : array_like, optional
        eta_gen [-], 0 < eta_gen <= 1 (default 1).
    mechanical_loss : array_like, optional
        Shaft-driven auxiliaries and gearbox loss between the flywheel and the generator
        [W], >= 0 (default 0).

    Returns
    -------
    BrakePerformance
        Warning ``EFFICIENCY_IMPLAUSIBLE`` outside :data:`BRAKE_EFFICIENCY_BAND`;
        ``EFFICIENCY_OUT_OF_RANGE`` (NaN) for eta_b > 1.

    Notes
    -----
    .. math::

        \eta_b = \frac{P_b}{m_f LHV}, \quad HR_b = \frac{m_f LHV}{P_b}, \quad
        bsfc = \frac{m_f}{P_b}, \quad bmep = \frac{P_b\, n_R}{V_d\, n}

    Equations (5)-(7) of the module: P_b from :func:`models.components.generator.shaft_power`;
    eta_b = P_b / (m_f LHV); HR_b = 1 / eta_b; bsfc = m_f / P_b;
    bmep = P_b n_R / (V_d n) with n = omega / (2 pi).  Heat rate and efficiency are on the LHV
    basis (the trade's default for engines, ISO 3046-1 [2]_).

    References
    ----------
    Heywood (2018), sections 2.3-2.9 [1]_; ISO 3046-1:2002 [2]_.

    Examples
    --------
    Invented point of the Kestrel Ridge block KR-GE1 (4.4 MW at 1500 rpm, 0.206 kg/s of a
    50 MJ/kg gas, generator 97.5 %):

    >>> g = EngineGeometry(0.21, 0.24, 0.48, 20, 12.5)
    >>> b = brake_performance(g, 4.4e6, 0.206, 1500 * 2 * math.pi / 60, 50.0e6,
    ...                       generator_efficiency=0.975)
    >>> round(float(b.brake_thermal_efficiency), 4), round(float(b.brake_heat_rate) * 3600)
    (0.4381, 8217)
    >>> round(float(b.brake_specific_fuel_consumption) * BSFC_G_PER_KWH, 1)
    164.3
    >>> round(float(b.brake_mean_effective_pressure) / 1e5, 2)
    21.72
    """
    (Pg, mf, w, lhv), status = _inputs(
        (generator_power, "pos"),
        (fuel_mass_flow, "pos"),
        (engine_speed, "pos"),
        (lower_heating_value, "pos"),
    )
    Pb, st = generator.shaft_power(Pg, generator_efficiency, mechanical_loss)
    status = np.asarray(status | st, dtype=np.uint32)
    Pb = np.where(np.isnan(Pb), 1.0, Pb)
    eta = Pb / (mf * lhv)
    flag(status, (status == 0) & (eta > 1.0), Reason.EFFICIENCY_OUT_OF_RANGE)
    lo, hi = BRAKE_EFFICIENCY_BAND
    flag(status, (status == 0) & ~((eta >= lo) & (eta <= hi)), Reason.EFFICIENCY_IMPLAUSIBLE)
    n_cyc = geometry.cycles_per_second(w)

    def out(a: ArrayLike) -> FloatArray:
        return _nan(a, status, Reason.EFFICIENCY_IMPLAUSIBLE)

    return BrakePerformance(
        brake_power=out(Pb),
        brake_torque=out(Pb / w),
        brake_thermal_efficiency=out(eta),
        brake_heat_rate=out(1.0 / eta),
        brake_specific_fuel_consumption=out(mf / Pb),
        brake_mean_effective_pressure=out(Pb / (geometry.displacement * n_cyc)),
        mean_piston_speed=out(geometry.mean_piston_speed(w)),
        status=status,
    )


def relative_efficiency(
    efficiency: ArrayLike, ideal_efficiency: ArrayLike
) -> tuple[FloatArray, StatusArray]:
    r"""Relative efficiency: actual over ideal-cycle efficiency [-].

    Parameters
    ----------
    efficiency : array_like
        Actual (e.g. brake thermal) efficiency [-], 0 < eta <= 1.
    ideal_efficiency : array_like
        Efficiency of the comparison cycle [-], 0 < eta_ideal <= 1.

    Returns
    -------
    ratio : ndarray
        eta / eta_ideal [-]; NaN with ``EFFICIENCY_OUT_OF_RANGE`` where above 1 (the ideal
        cycle must bound the engine).
    status : ndarray of uint32

    Notes
    -----
    .. math::

        \eta_{rel} = \frac{\eta}{\eta_{ideal}}

    References
    ----------
    Heywood (2018), section 5.7 (comparison with real engine cycles) [1]_.

    Examples
    --------
    >>> r, _ = relative_efficiency(0.44, 0.6299)
    >>> round(float(r), 3)
    0.699
    """
    (eta, ideal), status = _inputs((efficiency, "frac"), (ideal_efficiency, "frac"))
    ratio = eta / ideal
    flag(status, (status == 0) & (ratio > 1.0), Reason.EFFICIENCY_OUT_OF_RANGE)
    return _nan(ratio, status), status


# --------------------------------------------------------------------------------------------
# Combustion stoichiometry
# --------------------------------------------------------------------------------------------
def dry_air() -> mixtures.Mixture:
    r"""Dry air of :data:`models.properties.humid_air.DRY_AIR` as a mixture.

    References
    ----------
    .. [1] ISO 2533:1975, Standard Atmosphere, Table 1 (composition of dry air).
    """
    return mixtures.Mixture.from_mole_fractions(humid_air.DRY_AIR)


_M = mixtures.MOLAR_MASS
_I_O2 = INDEX["O2"]
_NOT_H2O = np.array([s != "H2O" for s in SPECIES])


def _o2_coefficients(
    fuel: FuelProperties, air: mixtures.Mixture, basis: OxygenBasis
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Return (c, a, b, A_st) of eq. (9), per kg of fuel.

    c mol O2 needed, a mol of stoichiometric air, b mol change of the products (O2 consumed
    counted negative), on the basis.
    """
    if basis not in ("dry", "wet"):
        raise ModelInputError("basis", basis, "'dry' or 'wet'")
    keep = _NOT_H2O if basis == "dry" else np.ones(len(SPECIES), dtype=bool)
    y = air.y
    pd = fuel.product_delta
    with np.errstate(divide="ignore", invalid="ignore"):  # NaN air rows pass through
        a_st = -pd[..., _I_O2] / y[..., _I_O2]
    c = -pd[..., _I_O2] / _M[_I_O2]
    a = a_st * ((y * keep) @ (1.0 / _M))
    b = (pd * keep) @ (1.0 / _M)
    return (
        np.asarray(c, dtype=np.float64),
        np.asarray(a, dtype=np.float64),
        np.asarray(b, dtype=np.float64),
        np.asarray(a_st, dtype=np.float64),
    )


def exhaust_oxygen(
    excess_air_ratio: ArrayLike,
    fuel: FuelProperties,
    air: mixtures.Mixture | None = None,
    basis: OxygenBasis = "dry",
) -> tuple[FloatArray, StatusArray]:
    r"""Exhaust O2 mole fraction of complete lean combustion (forward of eq. 9).

    Parameters
    ----------
    excess_air_ratio : array_like
        lambda = m_a / (m_f A_st) [-], >= 1.
    fuel : FuelProperties
        From :func:`models.properties.fuel.gas_fuel` (composition) or
        :func:`models.properties.fuel.liquid_fuel` (C/H/S/O mass fractions).
    air : models.properties.mixtures.Mixture, optional
        Combustion air (humid air); default :func:`dry_air`.
    basis : {"dry", "wet"}
        Dry: water removed before the analyser (extractive, cooled sample); wet: in situ.

    Returns
    -------
    x_O2 : ndarray
        [mol/mol]; NaN with ``INPUT_NONPHYSICAL`` for lambda < 1.
    status : ndarray of uint32

    Notes
    -----
    .. math::

        x_{O_2} = \frac{(\lambda - 1)\, c}{\lambda a + b}

    Per kg of fuel burnt in lambda A_st kg of air, complete combustion (C -> CO2, H -> H2O,
    S -> SO2):  x_O2 = (lambda - 1) c / (lambda a + b), with c the moles of O2 needed, a the
    moles of stoichiometric air and b the mole change of the fuel's products
    (``FuelProperties.product_delta``; O2 consumed counted negative), water left out of a and
    b on the dry basis.  No CO, unburnt hydrocarbons, NO or dissociation.

    References
    ----------
    Heywood (2018), section 4.2 and 4.9 (combustion stoichiometry; relations between exhaust
    composition and the air-fuel ratio) [1]_.

    Examples
    --------
    >>> from models.properties.fuel import gas_fuel
    >>> x, _ = exhaust_oxygen([1.0, 2.0], gas_fuel({"CH4": 1.0}))
    >>> [round(float(v), 4) for v in x]
    [0.0, 0.1105]
    """
    air = dry_air() if air is None else air
    c, a, b, _ = _o2_coefficients(fuel, air, basis)
    (lam,), status = _inputs((excess_air_ratio, "pos"), shape=np.broadcast(c, a).shape)
    flag(status, (status == 0) & (lam < 1.0), Reason.INPUT_NONPHYSICAL)
    x = (lam - 1.0) * c / (lam * a + b)
    return _nan(x, status), status


def excess_air_ratio_from_oxygen(
    oxygen: ArrayLike,
    fuel: FuelProperties,
    air: mixtures.Mixture | None = None,
    basis: OxygenBasis = "dry",
) -> tuple[FloatArray, StatusArray]:
    r"""Excess-air ratio lambda from the measured exhaust O2 (inverse of eq. 9).

    Parameters
    ----------
    oxygen : array_like
        Exhaust O2 mole fraction [mol/mol] (0.105, not 10.5 %), 0 <= x_O2 < x_O2 of the air
        on the same basis.
    fuel : FuelProperties
    air : models.properties.mixtures.Mixture, optional
        Combustion air; default :func:`dry_air`.
    basis : {"dry", "wet"}
        Basis of the analyser reading.

    Returns
    -------
    lambda : ndarray
        [-]; NaN with ``INPUT_NONPHYSICAL`` where O2 < 0 or at or above the air's own O2
        (no combustion, or a leak into the sample line).
    status : ndarray of uint32

    Notes
    -----
    .. math::

        \lambda = \frac{c + x_{O_2} b}{c - x_{O_2} a}

    lambda = (c + x b) / (c - x a), the solution of eq. (9) for lambda; x = 0 gives 1 (a rich
    mixture also reads 0 % O2: lambda <= 1 cannot be told apart without CO).  The often
    quoted 20.9 / (20.9 - O2 %) ignores the contraction of the products and reads 4-8 % high
    for natural gas at 8-15 % dry O2.

    References
    ----------
    Heywood (2018), section 4.9 [1]_.

    Examples
    --------
    >>> from models.properties.fuel import gas_fuel
    >>> lam, _ = excess_air_ratio_from_oxygen(0.1105, gas_fuel({"CH4": 1.0}))
    >>> round(float(lam), 3)
    2.0
    """
    air = dry_air() if air is None else air
    c, a, b, _ = _o2_coefficients(fuel, air, basis)
    (x,), status = _inputs((oxygen, "any"), shape=np.broadcast(c, a).shape)
    x_air = c / a
    flag(status, (status == 0) & ~((x >= 0.0) & (x < x_air)), Reason.INPUT_NONPHYSICAL)
    with np.errstate(divide="ignore", invalid="ignore"):
        lam = (c + x * b) / (c - x * a)
    return _nan(lam, status), status


def excess_air_ratio_from_air_flow(
    air_mass_flow: ArrayLike,
    fuel_mass_flow: ArrayLike,
    fuel: FuelProperties,
    air: mixtures.Mixture | None = None,
) -> tuple[FloatArray, StatusArray]:
    r"""Excess-air ratio lambda = m_a / (m_f A_st) from a measured air flow (eq. 8).

    Parameters
    ----------
    air_mass_flow : array_like
        Measured air flow m_a [kg/s] (humid air, as metered), > 0.
    fuel_mass_flow : array_like
        m_f [kg/s], > 0.
    fuel : FuelProperties
    air : models.properties.mixtures.Mixture, optional
        Composition of the metered air, whose O2 fraction sets A_st; default dry air.

    Returns
    -------
    lambda : ndarray
        [-]; lambda < 1 (rich) is returned as computed.
    status : ndarray of uint32

    Notes
    -----
    .. math::

        \lambda = \frac{m_a}{m_f\, A_{st}}

    References
    ----------
    .. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill,
       2018, section 2.9.

    Examples
    --------
    >>> from models.properties.fuel import gas_fuel
    >>> lam, _ = excess_air_ratio_from_air_flow(3.44, 0.1, gas_fuel({"CH4": 1.0}))
    >>> round(float(lam), 3)
    1.995
    """
    air = dry_air() if air is None else air
    *_, a_st = _o2_coefficients(fuel, air, "wet")
    (ma, mf), status = _inputs(
        (air_mass_flow, "pos"), (fuel_mass_flow, "pos"), shape=np.shape(a_st)
    )
    return _nan(ma / (mf * a_st), status), status


# --------------------------------------------------------------------------------------------
# Charge air, turbocharger, heat recovery
# --------------------------------------------------------------------------------------------
def charge_density(
    temperature: ArrayLike,
    pressure: ArrayLike,
    fluid: mixtures.Mixture | None = None,
    *,
    real_gas: bool = True,
) -> tuple[FloatArray, StatusArray]:
    r"""Density of the charge in the receiver, rho = p / (Z R T) [kg/m3].

    Parameters
    ----------
    temperature : array_like
        Receiver (charge-air) temperature after the intercooler [K].
    pressure : array_like
        Receiver pressure [Pa], absolute.
    fluid : models.properties.mixtures.Mixture, optional
        Charge composition (humid air, or air and fuel gas for a premixed gas engine);
        default dry air.
    real_gas : bool
        Include the compressibility factor Z of air
        (:func:`models.properties.mixtures.compressibility`, Lemmon et al. 2000 fit; about 1.001 at
        4 bar and 320 K).

    Returns
    -------
    rho : ndarray [kg/m3]
    status : ndarray of uint32

    Notes
    -----
    .. math::

        \rho = \frac{p}{Z R T}

    References
    ----------
    .. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill,
       2018, section 2.10.
    """
    mix = dry_air() if fluid is None else fluid
    (T, p), status = _inputs((temperature, "pos"), (pressure, "pos"), shape=mix.shape)
    flag(
        status,
        (status == 0) & ((T < mixtures.T_MIN) | (T > mixtures.T_MAX)),
        Reason.TEMPERATURE_OUT_OF_RANGE,
    )
    flag(status, (status == 0) & (p > mixtures.P_MAX_REAL), Reason.PRESSURE_OUT_OF_RANGE)
    Z = mixtures.compressibility(np.where(status == 0, T, 300.0), np.where(status == 0, p, 1e5))
    rho = p / ((Z if real_gas else 1.0) * mix.R * T)
    return _nan(rho, status), status


def volumetric_efficiency(
    geometry: EngineGeometry,
    charge_mass_flow: ArrayLike,
    engine_speed: ArrayLike,
    receiver_temperature: ArrayLike,
    receiver_pressure: ArrayLike,
    *,
    fluid: mixtures.Mixture | None = None,
) -> tuple[FloatArray, StatusArray]:
    r"""Volumetric efficiency against the receiver (charge-air) density (eq. 10).

    Parameters
    ----------
    geometry : EngineGeometry
    charge_mass_flow : array_like
        Mass flow inducted [kg/s]: air, or air and fuel for a premixed gas engine.
    engine_speed : array_like
        Engine speed omega [rad/s], > 0.
    receiver_temperature, receiver_pressure : array_like
        Charge-air temperature [K] and pressure [Pa] after the intercooler.
    fluid : models.properties.mixtures.Mixture, optional
        Composition of the charge; default dry air.

    Returns
    -------
    eta_v : ndarray [-]
    status : ndarray of uint32

    Notes
    -----
    .. math::

        \eta_v = \frac{m_{ch}}{\rho_{rec} V_d\, n / n_R}

    eta_v = m_ch / (rho_rec V_d n / n_R), rho_rec from :func:`charge_density`.  Referred to
    the receiver, not the ambient, so that boost is not counted as breathing; values of
    0.85-1.0 are usual for four-stroke engines, above 1 with scavenging overlap.  For a
    two-stroke engine the same expression is the delivery ratio.

    References
    ----------
    Heywood (2018), section 2.10 (volumetric efficiency; for supercharged engines the inlet
    density is that of the inlet manifold) [1]_.
    """
    rho, status = charge_density(receiver_temperature, receiver_pressure, fluid)
    (m, w), st = _inputs((charge_mass_flow, "pos"), (engine_speed, "pos"), shape=rho.shape)
    status = np.asarray(status | st, dtype=np.uint32)
    eta = m / (
        np.where(np.isnan(rho), 1.0, rho) * geometry.displacement * geometry.cycles_per_second(w)
    )
    return _nan(eta, status), status


def turbocharger_compressor(
    fluid: mixtures.Mixture,
    inlet_temperature: ArrayLike,
    inlet_pressure: ArrayLike,
    outlet_temperature: ArrayLike,
    outlet_pressure: ArrayLike,
) -> CompressorState:
    r"""Turbocharger compressor figures, ambient (inlet) to charge air before the intercooler.

    Parameters
    ----------
    fluid : models.properties.mixtures.Mixture
        Gas compressed: humid air, or the air-fuel mixture of a gas engine mixing upstream.
    inlet_temperature, inlet_pressure : array_like
        Compressor inlet [K], [Pa] (ambient, or after the inlet filter when measured).
    outlet_temperature, outlet_pressure : array_like
        Compressor outlet, before the intercooler [K], [Pa].

    Returns
    -------
    models.components.compressor.CompressorState
        ``pressure_ratio`` and ``isentropic_efficiency`` with the real-gas departure, as for
        the gas-turbine compressor; the ``EFFICIENCY_IMPLAUSIBLE`` warning uses
        :data:`TURBOCHARGER_EFFICIENCY_BAND`.

    Notes
    -----
    .. math::

        \eta_c = \frac{h(T_{2s}, p_2) - h(T_1, p_1)}{h(T_2, p_2) - h(T_1, p_1)}

    :func:`models.components.compressor.compressor`: eta_c = (h2s - h1) / (h2 - h1).  With one
    compressor stage per engine bank, pass each bank's readings separately.

    References
    ----------
    .. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill,
       2018, section 6.8 (turbocharger compressor).
    .. [2] H. I. H. Saravanamuttoo et al., *Gas Turbine Theory*, 7th ed., 2017, section 2.1.
    """
    st = compressor(fluid, inlet_temperature, inlet_pressure, outlet_temperature, outlet_pressure)
    status = np.array(st.status & ~np.uint32(Reason.EFFICIENCY_IMPLAUSIBLE), dtype=np.uint32)
    eta = st.isentropic_efficiency
    lo, hi = TURBOCHARGER_EFFICIENCY_BAND
    with np.errstate(invalid="ignore"):
        flag(status, (status == 0) & ~((eta >= lo) & (eta <= hi)), Reason.EFFICIENCY_IMPLAUSIBLE)
    return replace(st, status=status)


def exhaust_heat(
    exhaust: mixtures.Mixture,
    exhaust_mass_flow: ArrayLike,
    temperature_in: ArrayLike,
    temperature_out: ArrayLike,
) -> tuple[FloatArray, StatusArray]:
    r"""Heat given up by the exhaust in a recovery boiler, m_g (h(T_in) - h(T_out)) [W].

    Parameters
    ----------
    exhaust : models.properties.mixtures.Mixture
        Exhaust gas (e.g. :func:`models.components.combustor.exhaust_mixture`).
    exhaust_mass_flow : array_like
        m_g [kg/s], > 0.
    temperature_in, temperature_out : array_like
        Gas temperature before and after the boiler [K]; T_out <= T_in.

    Returns
    -------
    Q : ndarray [W]
    status : ndarray of uint32

    Notes
    -----
    .. math::

        Q = m_g \left(h_g(T_{in}) - h_g(T_{out})\right)

    References
    ----------
    .. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill,
       2018, section 2.8 (fuel energy balance).
    """
    (m, t_in, t_out), status = _inputs(
        (exhaust_mass_flow, "pos"),
        (temperature_in, "pos"),
        (temperature_out, "pos"),
        shape=exhaust.shape,
    )
    flag(status, (status == 0) & (t_out > t_in), Reason.INPUT_NONPHYSICAL)
    q = m * (exhaust.h(t_in) - exhaust.h(t_out))
    flag(status, (status == 0) & np.isnan(q), Reason.TEMPERATURE_OUT_OF_RANGE)
    return _nan(q, status), status


@dataclass(frozen=True)
class ChpEfficiency:
    """Result of :func:`chp_efficiency`.

    Attributes
    ----------
    thermal_efficiency : P_gen / (m_f LHV) [-] (electrical, at the generator terminals)
    heat_recovery_efficiency : heat recovered / (m_f LHV) [-]
    chp_total_efficiency : the sum of the two [-]
    status : Reason bits
    """

    thermal_efficiency: FloatArray
    heat_recovery_efficiency: FloatArray
    chp_total_efficiency: FloatArray
    status: StatusArray


def chp_efficiency(
    generator_power: ArrayLike,
    fuel_mass_flow: ArrayLike,
    lower_heating_value: ArrayLike,
    *,
    jacket_water_heat: ArrayLike | None = None,
    lube_oil_heat: ArrayLike | None = None,
    charge_air_cooler_heat: ArrayLike | None = None,
    exhaust_heat_recovered: ArrayLike | None = None,
) -> ChpEfficiency:
    r"""Electrical, heat-recovery and total efficiency of a CHP engine set (eq. 11).

    Parameters
    ----------
    generator_power : array_like
        P_gen [W], > 0.
    fuel_mass_flow : array_like
        m_f [kg/s], > 0.
    lower_heating_value : array_like
        LHV [J/kg], > 0.
    jacket_water_heat, lube_oil_heat, charge_air_cooler_heat : array_like, optional
        As ``exhaust_heat_recovered``.
    exhaust_heat_recovered : array_like, optional
        Useful heat recovered from each circuit [W], >= 0.  Leave out (None) a stream not
        recovered on site; a NaN element is a missing reading (the heat figures are NaN).

    Returns
    -------
    ChpEfficiency
        ``EFFICIENCY_OUT_OF_RANGE`` (NaN) where the total exceeds 1.

    Notes
    -----
    .. math::

        \eta_{CHP} = \frac{P_{gen} + Q_{jw} + Q_{lo} + Q_{cac} + Q_{exh}}{m_f\, LHV}

    Only heat delivered to the user counts: a charge-air cooler whose low-temperature stage
    dumps to a radiator contributes its high-temperature stage only.  LHV basis.

    References
    ----------
    ISO 3046-1:2002 (fuel energy on the LHV basis) [2]_; heat-recovery figures are site
    measurements (heat meters).

    Examples
    --------
    >>> c = chp_efficiency(4.4e6, 0.206, 50.0e6, jacket_water_heat=1.2e6, lube_oil_heat=0.4e6,
    ...                    exhaust_heat_recovered=2.1e6)
    >>> [round(float(v), 4) for v in (c.thermal_efficiency, c.chp_total_efficiency)]
    [0.4272, 0.7864]
    """
    heats = [
        h
        for h in (jacket_water_heat, lube_oil_heat, charge_air_cooler_heat, exhaust_heat_recovered)
        if h is not None
    ]
    (Pg, mf, lhv, *qs), status = _inputs(
        (generator_power, "pos"),
        (fuel_mass_flow, "pos"),
        (lower_heating_value, "pos"),
        *((h, "nonneg") for h in heats),
    )
    fuel_heat = mf * lhv
    eta_el = Pg / fuel_heat
    q = np.zeros(status.shape)
    for h in qs:
        q = q + h
    eta_q = q / fuel_heat
    total = eta_el + eta_q
    flag(status, (status == 0) & (total > 1.0), Reason.EFFICIENCY_OUT_OF_RANGE)
    return ChpEfficiency(
        thermal_efficiency=_nan(eta_el, status),
        heat_recovery_efficiency=_nan(eta_q, status),
        chp_total_efficiency=_nan(total, status),
        status=status,
    )


# --------------------------------------------------------------------------------------------
# Heat input per charge, cut-off ratio
# --------------------------------------------------------------------------------------------
def heat_input_per_charge(
    fuel_mass_flow: ArrayLike,
    charge_mass_flow: ArrayLike,
    lower_heating_value: ArrayLike,
    combustion_efficiency: ArrayLike = 1.0,
) -> tuple[FloatArray, StatusArray]:
    r"""Heat released per kg of trapped charge, q_in = eta_comb m_f LHV / m_ch [J/kg] (eq. 12).

    Parameters
    ----------
    fuel_mass_flow : array_like
        Fuel burnt [kg/s] (or fuel per cycle [kg]), > 0.
    charge_mass_flow : array_like
        Trapped charge [kg/s] (or per cycle [kg], the same basis as the fuel), > 0: the air
        trapped (times the trapping efficiency of a scavenged engine), plus the fuel of a
        premixed gas engine, plus residual gas when known.
    lower_heating_value : array_like
        LHV [J/kg], > 0.
    combustion_efficiency : array_like, optional
        Fraction of the fuel burnt [-], 0 < eta <= 1 (default 1; a lean-burn gas engine
        slips 1-3 % of its fuel unburnt, common practice).

    Returns
    -------
    q_in : ndarray [J/kg]
    status : ndarray of uint32

    Notes
    -----
    .. math::

        q = \frac{\eta_{comb}\, m_{f,cyc}\, LHV}{m_{ch,cyc}}
          = \frac{\eta_{comb}\, m_f\, LHV}{m_{ch}}

    Per cycle and cylinder, m_f,cyc = m_f / (z n_cyc) and m_ch,cyc = m_ch / (z n_cyc); the
    ratio is the same on a flow basis, so flows may be passed directly.

    References
    ----------
    .. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill,
       2018, section 5.3.
    """
    (mf, mch, lhv, eta), status = _inputs(
        (fuel_mass_flow, "pos"),
        (charge_mass_flow, "pos"),
        (lower_heating_value, "pos"),
        (combustion_efficiency, "frac"),
    )
    return _nan(eta * mf * lhv / mch, status), status


def cycle_from_fuel(
    kind: Literal["otto", "diesel", "dual"],
    compression_ratio: ArrayLike,
    T1: ArrayLike,
    p1: ArrayLike,
    *,
    fuel_mass_flow: ArrayLike,
    charge_mass_flow: ArrayLike,
    lower_heating_value: ArrayLike,
    peak_cylinder_pressure: ArrayLike | None = None,
    fluid: mixtures.Mixture | None = None,
    combustion_efficiency: ArrayLike = 1.0,
    gamma: ArrayLike = GAMMA_AIR,
    gas_constant: ArrayLike = R_DRY_AIR,
) -> ReciprocatingCycle:
    r"""Return the ideal cycle of an engine from its measured fuel and trapped charge.

    Parameters
    ----------
    kind : {"otto", "diesel", "dual"}
        Otto for spark-ignition gas engines, Diesel or dual (with ``peak_cylinder_pressure``) for
        compression ignition.
    compression_ratio : array_like
        Geometric compression ratio r [-].
    T1, p1 : array_like
        State at BDC before compression [K], [Pa]: the receiver (charge-air) temperature and
        pressure (no intake heating, no valve pressure loss).
    fuel_mass_flow, charge_mass_flow, lower_heating_value, combustion_efficiency
        As :func:`heat_input_per_charge`.
    peak_cylinder_pressure : array_like, optional
        Measured peak cylinder pressure [Pa]; needed for ``"dual"``.
    fluid : models.properties.mixtures.Mixture, optional
        None: air standard (constant ``gamma``, ``gas_constant``); a mixture: variable
        properties.
    gamma, gas_constant : array_like, optional
        Constant-property data [-], [J/(kg K)].

    Returns
    -------
    models.cycles.reciprocating.ReciprocatingCycle
        ``cutoff_ratio`` is the estimate of :func:`estimate_cutoff_ratio`.

    Notes
    -----
    .. math::

        q = \frac{\eta_{comb}\, m_f\, LHV}{m_{ch}} \quad \text{(heat per kg of trapped charge)}

    References
    ----------
    .. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill,
       2018, section 5.3.
    """
    q, st = heat_input_per_charge(
        fuel_mass_flow, charge_mass_flow, lower_heating_value, combustion_efficiency
    )
    r = compression_ratio
    if kind == "otto":
        cyc = otto_cycle(
            T1, p1, r, cycle_heat_input=q, fluid=fluid, gamma=gamma, gas_constant=gas_constant
        )
    elif kind == "diesel":
        cyc = diesel_cycle(
            T1, p1, r, cycle_heat_input=q, fluid=fluid, gamma=gamma, gas_constant=gas_constant
        )
    elif kind == "dual":
        if peak_cylinder_pressure is None:
            raise ModelInputError("peak_cylinder_pressure", None, "a pressure [Pa] for kind='dual'")
        cyc = dual_cycle(
            T1,
            p1,
            r,
            cycle_heat_input=q,
            peak_cylinder_pressure=peak_cylinder_pressure,
            fluid=fluid,
            gamma=gamma,
            gas_constant=gas_constant,
        )
    else:
        raise ModelInputError("kind", kind, "'otto', 'diesel' or 'dual'")
    return replace(cyc, status=np.broadcast_to(st, cyc.status.shape) | cyc.status)


def estimate_cutoff_ratio(
    compression_ratio: ArrayLike,
    T1: ArrayLike,
    p1: ArrayLike,
    *,
    fuel_mass_flow: ArrayLike,
    charge_mass_flow: ArrayLike,
    lower_heating_value: ArrayLike,
    peak_cylinder_pressure: ArrayLike | None = None,
    fluid: mixtures.Mixture | None = None,
    combustion_efficiency: ArrayLike = 1.0,
    gamma: ArrayLike = GAMMA_AIR,
) -> tuple[FloatArray, StatusArray]:
    r"""Cut-off ratio of the ideal Diesel (or dual) cycle from fuel per cycle and charge.

    Parameters
    ----------
    compression_ratio : array_like
        r [-], > 1.
    T1, p1 : array_like
        Receiver temperature [K] and pressure [Pa], taken as the BDC state.
    fuel_mass_flow, charge_mass_flow : array_like
        Fuel and trapped charge [kg/s], or per cycle [kg] (same basis).
    lower_heating_value : array_like
        LHV [J/kg].
    peak_cylinder_pressure : array_like, optional
        Measured peak cylinder pressure [Pa]: the dual cycle, with part of the heat at
        constant volume.
    fluid : models.properties.mixtures.Mixture, optional
        None: constant specific heats (``gamma``); a mixture: variable properties.
    combustion_efficiency : array_like, optional
        [-] (default 1).
    gamma : array_like, optional
        [-] (default 1.4).

    Returns
    -------
    rc : ndarray [-]
    status : ndarray of uint32

    Notes
    -----
    .. math::

        r_c = \frac{T_{3b}}{T_{3a}}, \qquad \text{constant } c_p:\;
        r_c = 1 + \frac{q}{c_p T_1 r^{\gamma - 1}}

    Method: the heat per kg of trapped charge q = eta_comb m_f,cyc LHV / m_ch,cyc (eq. 12) is
    added to the ideal cycle after isentropic compression from the receiver state by r; at
    constant pressure (Diesel), or at constant volume up to the measured peak pressure and
    the rest at constant pressure (dual).  Then rc = v3b / v3a = T3b / T3a.  With constant
    specific heats and no peak pressure, rc = 1 + q / (cp T1 r^(gamma-1)).

    Assumptions: complete combustion of the fraction eta_comb, no heat loss, no residual gas
    unless it is counted in the charge, trapped mass at the receiver state, frozen
    composition (charge air properties), ideal gas.  The estimate is the equivalent cut-off
    of the air-standard cycle burning the same fuel, not the end of injection.

    References
    ----------
    Heywood (2018), section 5.3 (the cycle heat input expressed by the fuel-air ratio) [1]_.

    Examples
    --------
    A Diesel set at r = 16 burning 0.1 kg/s of a 42.7 MJ/kg gas oil in 3.2 kg/s of air:

    >>> rc, _ = estimate_cutoff_ratio(16.0, 330.0, 3.0e5, fuel_mass_flow=0.1,
    ...                               charge_mass_flow=3.2, lower_heating_value=42.7e6)
    >>> round(float(rc), 3)
    2.328
    """
    kind: Literal["diesel", "dual"] = "diesel" if peak_cylinder_pressure is None else "dual"
    cyc = cycle_from_fuel(
        kind,
        compression_ratio,
        T1,
        p1,
        fuel_mass_flow=fuel_mass_flow,
        charge_mass_flow=charge_mass_flow,
        lower_heating_value=lower_heating_value,
        peak_cylinder_pressure=peak_cylinder_pressure,
        fluid=fluid,
        combustion_efficiency=combustion_efficiency,
        gamma=gamma,
    )
    return cyc.cutoff_ratio, cyc.status

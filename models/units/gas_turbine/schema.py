"""The gas-turbine unit type: its measurements, parameters and results, declared once.

:data:`GAS_TURBINE` implements :class:`models.units.base.UnitType`; its ``compute`` checks the
names and types of what it is given and runs
:func:`models.units.gas_turbine.reconstruct.reconstruct`.  Station numbers: brayscope numbering
(``docs/glossary.md``, with the SAE AS755 equivalents).  Units are SI (``"1"`` for dimensionless,
the trade's kJ/kWh for heat rates).

Advisory monitoring only: not a protection or control system.  Follow the manufacturer's
limits, site procedures, local codes and licensed engineers.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from models.correction.gas_turbine import CorrectionTables
from models.properties import humid_air, mixtures
from models.properties.fuel import FuelProperties
from models.status import ModelInputError
from models.units.base import ComputeOutput, FieldSpec
from models.units.gas_turbine.checks import DEFAULT_PARAMETERS
from models.units.gas_turbine.reconstruct import reconstruct

__all__ = ["GAS_TURBINE", "GasTurbineType"]

FloatArray = NDArray[np.float64]


def _m(
    name: str, unit: str, desc: str, low: float, high: float, *, required: bool = True
) -> FieldSpec:
    return FieldSpec(name, unit, desc, required=required, low=low, high=high)


_MEASUREMENTS: tuple[FieldSpec, ...] = (
    # station numbers: brayscope numbering (docs/glossary.md, with the SAE AS755 equivalents)
    _m("ambient_temperature", "K", "T0, station 0: dry-bulb air temperature outside the inlet",
       200.0, 350.0),
    _m("ambient_pressure", "Pa", "p0, station 0: barometric pressure (absolute)", 5.0e4, 1.2e5),
    _m("ambient_relative_humidity", "1",
       "RH, station 0: fraction 0..1 (over water; over ice below 273.16 K)",
       0.0, 1.0 + humid_air.RH_TOLERANCE),
    _m("compressor_inlet_temperature", "K", "T1, station 1: after the inlet filter and duct",
       200.0, 350.0),
    _m("compressor_inlet_pressure", "Pa", "p1, station 1 (absolute)", 5.0e4, 1.2e5),
    _m("compressor_discharge_temperature", "K", "T2, station 2", 250.0, 1000.0),
    _m("compressor_discharge_pressure", "Pa", "p2, station 2 (absolute)", 1.0e5,
       mixtures.P_MAX_REAL),
    _m("exhaust_temperature", "K", "T4, station 4: turbine exhaust mixed mean", 400.0, 1200.0),
    _m("exhaust_pressure", "Pa", "p4, station 4 (absolute)", 5.0e4, 2.0e5),
    _m("fuel_mass_flow", "kg/s", "m_f", 0.0, 100.0),
    _m("generator_power", "W", "P_gen, generator terminals", 0.0, 2.0e9),
    _m("air_mass_flow", "kg/s", "m_a, station 1, if measured; else by heat balance",
       0.0, 2000.0, required=False),
    _m("fuel_temperature", "K", "T_f; default 298.15 K (h_f = 0)", 200.0, 700.0, required=False),
)  # fmt: skip

_PARAMETERS: tuple[FieldSpec, ...] = tuple(
    FieldSpec(name, unit, desc, required=False, low=lo, high=hi, default=DEFAULT_PARAMETERS[name])
    for name, unit, desc, lo, hi in (
        ("generator_efficiency", "1", "eta_gen = P_gen / (P_shaft - P_mech)", 0.5, 1.0),
        ("combustor_pressure_loss", "1", "combustor pressure loss, fraction of p2", 0.0, 0.2),
        ("combustion_efficiency", "1", "eta_b, fraction of LHV released", 0.9, 1.0),
        ("casing_heat_loss_fraction", "1", "casing heat loss, fraction of m_f LHV", 0.0, 0.05),
        ("mechanical_loss", "W", "bearing/gearbox/auxiliary loss", 0.0, 1.0e8),
    )
)

_RESULT_UNITS: Mapping[str, tuple[str, str]] = {
    "compressor_pressure_ratio": ("1", "p2 / p1"),
    "compressor_isentropic_efficiency": ("1", "(h2s - h1) / (h2 - h1), real gas"),
    "compressor_polytropic_efficiency": ("1", "R ln(p2/p1) / (s0(T2) - s0(T1)), ideal gas"),
    "compressor_specific_work": ("J/kg", "h2 - h1"),
    "compressor_power": ("W", "m_a (h2 - h1)"),
    "compressor_isentropic_discharge_temperature": ("K", "T2s"),
    "air_mass_flow": ("kg/s", "measured or heat-balance air flow (air_mass_flow_source)"),
    "heat_balance_air_mass_flow": ("kg/s", "air flow from the overall heat balance"),
    "fuel_air_ratio": ("1", "m_f / m_a"),
    "exhaust_mass_flow": ("kg/s", "m_a + m_f"),
    "turbine_inlet_temperature": ("K", "T3, station 3, by combustor heat balance (mixed mean)"),
    "turbine_inlet_pressure": ("Pa", "p3 = p2 (1 - combustor_pressure_loss)"),
    "turbine_isentropic_efficiency": ("1", "(h3 - h4) / (h3 - h4s)"),
    "turbine_isentropic_exhaust_temperature": ("K", "T4s"),
    "turbine_power": ("W", "m_g (h3 - h4)"),
    "shaft_power": ("W", "P_gen / eta_gen + P_mech"),
    "heat_input": ("W", "m_f LHV"),
    "heat_rate_lhv_kj_per_kwh": ("kJ/kWh", "3600 m_f LHV / P_gen"),
    "heat_rate_hhv_kj_per_kwh": ("kJ/kWh", "3600 m_f HHV / P_gen"),
    "thermal_efficiency": ("1", "P_gen / (m_f LHV)"),
    "back_work_ratio": ("1", "W_c / W_t"),
    "ideal_brayton_efficiency": ("1", "air standard, gamma 1.4, measured pressure ratio"),
    "ideal_cycle_efficiency": ("1", "ideal cycle on the real fluid, same PR and T3"),
    "carnot_efficiency": ("1", "1 - T1 / T3"),
    "corrected_power": ("W", "corrected to 15 degC, 101.325 kPa, 60 % RH (correction_method)"),
    "corrected_heat_rate_lhv_kj_per_kwh": ("kJ/kWh", "corrected LHV heat rate (correction_method)"),
    "corrected_power_model": ("W", "model-based corrected power"),
    "corrected_heat_rate_lhv_model_kj_per_kwh": ("kJ/kWh", "model-based corrected LHV heat rate"),
    "corrected_power_curve": ("W", "curve-based corrected power"),
    "corrected_heat_rate_lhv_curve_kj_per_kwh": ("kJ/kWh", "curve-based corrected LHV heat rate"),
    "heat_balance_closure": ("1", "(out - in) / heat input with the measured air flow"),
}


@dataclass
class GasTurbineType:
    """The single-shaft gas turbine unit type (implements :class:`models.units.base.UnitType`).

    ``fuel`` of :meth:`compute` is a :class:`models.properties.fuel.FuelProperties`; ``corrections``
    an optional :class:`models.correction.gas_turbine.CorrectionTables`.
    """

    name: str = "gas_turbine"
    description: str = (
        "Single-shaft gas turbine: compressor, combustor, turbine and generator; cycle "
        "reconstruction, heat rate, comparison cycles and correction to ISO reference "
        "conditions. Advisory monitoring only."
    )
    measurements: tuple[FieldSpec, ...] = _MEASUREMENTS
    parameters: tuple[FieldSpec, ...] = _PARAMETERS
    results: tuple[FieldSpec, ...] = tuple(
        FieldSpec(k, u, d, required=False) for k, (u, d) in _RESULT_UNITS.items()
    )

    def compute(
        self,
        measurements: Mapping[str, FloatArray],
        fuel: Any,
        parameters: Mapping[str, FloatArray | float],
        corrections: Any = None,
    ) -> ComputeOutput:
        """Reconstruct a batch; see :func:`reconstruct`.

        Unknown measurement or parameter names raise :class:`ModelInputError`; missing
        optional ones take their defaults.
        """
        known_m = {f.name for f in self.measurements}
        known_p = {f.name for f in self.parameters}
        for k in measurements:
            if k not in known_m:
                raise ModelInputError("measurements", k, ", ".join(sorted(known_m)))
        for k in parameters:
            if k not in known_p:
                raise ModelInputError("parameters", k, ", ".join(sorted(known_p)))
        if not isinstance(fuel, FuelProperties):
            raise ModelInputError(
                "fuel", type(fuel).__name__, "a models.properties.fuel.FuelProperties"
            )
        if corrections is not None and not isinstance(corrections, CorrectionTables):
            raise ModelInputError(
                "corrections",
                type(corrections).__name__,
                "models.correction.gas_turbine.CorrectionTables",
            )
        missing = [f.name for f in self.measurements if f.required and f.name not in measurements]
        if missing:
            raise ModelInputError("measurements", missing, "all required measurements present")
        kw: dict[str, Any] = {k: measurements[k] for k in measurements}
        for f in self.parameters:
            kw[f.name] = parameters.get(f.name, f.default)
        return reconstruct(**kw, fuel=fuel, corrections=corrections)


#: The gas-turbine unit type instance registered by
#: :func:`models.units.registry.builtin_unit_types`.
GAS_TURBINE = GasTurbineType()

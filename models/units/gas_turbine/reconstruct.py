"""Whole-cycle reconstruction of a single-shaft gas turbine from plant measurements.

Length (about 800 lines, above the project's 600): the eight steps of one block (inputs,
compressor, heat balance, hot section, heat rate, comparison cycles, correction, outputs) hand
each other one set of per-block intermediates; they are kept beside the function that runs
them, and about a third of the module is documentation.

Stations: 0 ambient, 1 compressor inlet, 2 compressor discharge, 3 turbine inlet,
4 turbine exhaust (see ``docs/glossary.md``).  Everything is SI with absolute pressures.

Method (``docs/method.md`` has the full derivation and references)
-------------------------------------------------------------------
1. Working fluid: humid air from ambient T0, p0, RH
   (:func:`models.properties.humid_air.saturation_pressure`,
   :func:`models.properties.humid_air.enhancement_factor`), composition held through the compressor.
   Exhaust gas = air + the species change of burnt fuel (``FuelProperties.product_delta``).
2. Properties: NASA 7-coefficient ideal-gas mixture data (:mod:`models.properties.thermo_data`) plus
   the real-gas departure of :func:`models.properties.mixtures.residual` at every station (the molar
   departure of air scaled by the mixture's gas constant).  Per kg of *air*, every property of the
   exhaust gas is linear in the fuel-air ratio f: ``H_g(T, p) = h_a(T, p) + f h_pd(T, p)``, where
   ``h_pd`` is the enthalpy of the species change of 1 kg of burnt fuel.
3. Air flow when not measured, overall heat balance (ASME PTC 22 style)::

       m_a h_a(T1,p1) + m_f (h_f + eta_b LHV) = P_shaft + Q_loss + m_a h_a(T4,p4) + m_f h_pd(T4,p4)
       P_shaft = P_gen / eta_gen + P_mech,  Q_loss = c_loss m_f LHV
       => m_a = (m_f (h_f + (eta_b - c_loss) LHV - h_pd(T4,p4)) - P_shaft)
                / (h_a(T4,p4) - h_a(T1,p1))

   Because the exhaust enthalpy is linear in the composition this is the exact solution of
   the usual fixed-point iteration on exhaust composition (one step, no iteration).
4. Combustor, casing heat loss lumped here::

       m_a h_a(T2,p2) + m_f (h_f + (eta_b - c_loss) LHV) = m_a H_g(T3, p3),  p3 = p2 (1 - dp)

   T3 is the mixed-mean heat-balance temperature (ISO 2314-style reference turbine inlet
   temperature when cooling air is mixed in), below the true firing temperature.
5. Turbine: ``eta_t = (h3 - h4) / (h3 - h4s)``, ``W_t = m_g (h3 - h4)``; then
   ``W_t - W_c = P_shaft`` holds exactly when the air flow comes from the heat balance.
6. Heat rate ``HR = 3600 m_f LHV / P_gen`` [kJ/kWh with LHV in kJ/kg]; efficiency
   ``P_gen / (m_f LHV)``.
7. Comparison cycles (:mod:`models.cycles.brayton`) and corrections to reference ambient
   (:mod:`models.correction.gas_turbine`).

Speed: the reconstruction runs in chunks that stay in cache, with the mixture coefficient
tables of each chunk built once (dry air + water + burnt fuel as three basis fluids of the
property kernel, :mod:`models.properties.kernel`) and Newton solves that stop when the whole
chunk has converged.  :mod:`models.components.compressor`,
:mod:`models.components.combustor` and :mod:`models.components.turbine` hold the same equations on
:class:`models.properties.mixtures.Mixture` objects, one component at a time; the tests check the
two agree.

Advisory monitoring only: not a protection or control system.  Follow the manufacturer's
limits, site procedures, local codes and licensed engineers.

References
----------
.. [1] ASME PTC 22-2014, Performance Test Code on Gas Turbines, section 5 (heat balance
   determination of exhaust flow).
.. [2] ISO 2314:2009, Gas turbines — Acceptance tests (reference turbine inlet temperature).
.. [3] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen et al., *Gas Turbine Theory*,
   7th ed., Pearson, 2017, ch. 2 and 9.
.. [4] B. J. McBride, S. Gordon, M. A. Reno, NASA TM-4513, 1993 (property data).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.components.compressor import COMPRESSOR_EFFICIENCY_BAND
from models.components.turbine import TURBINE_EFFICIENCY_BAND
from models.correction.gas_turbine import (
    REFERENCE_PRESSURE,
    REFERENCE_TEMPERATURE,
    CorrectionTables,
    curve_correction,
    reference_operating_point,
)
from models.properties import humid_air, mixtures
from models.properties.fuel import FuelProperties
from models.properties.kernel import (
    DEPARTURE_H,
    PHI,
    Fluid,
    Groups,
    H,
    departure,
    departure_coefficients,
    log_mean,
)
from models.status import ModelInputError, Reason, flag
from models.units.base import ComputeOutput
from models.units.gas_turbine.checks import (
    DEFAULT_FUEL_TEMPERATURE,
    DEFAULT_PARAMETERS,
    HEAT_RATE_BAND,
    SAFE_VALUES,
    Inputs,
    check_inputs,
    fuel_enthalpy,
    fuel_temperature_used,
)
from models.units.gas_turbine.fluids import (
    DRY_AIR_O2_MASS_FRACTION,
    FuelData,
    FuelHeat,
    ReferenceAmbient,
    fuel_data,
    reference_ambient,
)
from models.units.gas_turbine.simulate import forward_cycle

__all__ = ["RESULT_NAMES", "reconstruct"]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]
StatusArray = NDArray[np.uint32]
Num = float | FloatArray

_CHUNK = 4096
_BLOCK = 8192  # elements per array operation (several chunks)


# ============================================================================================
# Results, in the documented order
# ============================================================================================
#: Result names of :func:`reconstruct`, in the documented order.
RESULT_NAMES: tuple[str, ...] = (
    "compressor_pressure_ratio",
    "compressor_isentropic_efficiency",
    "compressor_polytropic_efficiency",
    "compressor_specific_work",
    "compressor_power",
    "compressor_isentropic_discharge_temperature",
    "air_mass_flow",
    "heat_balance_air_mass_flow",
    "fuel_air_ratio",
    "exhaust_mass_flow",
    "turbine_inlet_temperature",
    "turbine_inlet_pressure",
    "turbine_isentropic_efficiency",
    "turbine_isentropic_exhaust_temperature",
    "turbine_power",
    "shaft_power",
    "heat_input",
    "heat_rate_lhv_kj_per_kwh",
    "heat_rate_hhv_kj_per_kwh",
    "thermal_efficiency",
    "back_work_ratio",
    "ideal_brayton_efficiency",
    "ideal_cycle_efficiency",
    "carnot_efficiency",
    "corrected_power",
    "corrected_heat_rate_lhv_kj_per_kwh",
    "corrected_power_model",
    "corrected_heat_rate_lhv_model_kj_per_kwh",
    "corrected_power_curve",
    "corrected_heat_rate_lhv_curve_kj_per_kwh",
    "heat_balance_closure",
)


_MODEL_OF = {
    "corrected_power": "corrected_power_model",
    "corrected_heat_rate_lhv_kj_per_kwh": "corrected_heat_rate_lhv_model_kj_per_kwh",
}
_CURVE_RESULTS = ("corrected_power_curve", "corrected_heat_rate_lhv_curve_kj_per_kwh")
_SOURCE_LABELS = np.array(["measured", "heat_balance"])  # code 0: measured, 1: heat balance


# ============================================================================================
# The steps of one block
# ============================================================================================
def _check_efficiency(
    st: StatusArray, eta: FloatArray, bad: BoolArray, conv: BoolArray, band: tuple[float, float]
) -> BoolArray:
    """Flag a failed solve, an efficiency outside (0, 1] (both errors) and outside ``band``.

    Returns the elements whose efficiency is not computable: ``bad`` or a failed check.
    """
    flag(st, ~conv & ~bad, Reason.NOT_CONVERGED)
    bad = bad | ~conv
    eff_bad = ~bad & ~((eta > 0) & (eta <= 1))
    flag(st, eff_bad, Reason.EFFICIENCY_OUT_OF_RANGE)
    bad |= eff_bad
    lo, hi = band
    flag(st, ~bad & ~((eta >= lo) & (eta <= hi)), Reason.EFFICIENCY_IMPLAUSIBLE)
    return bad


@dataclass(frozen=True, slots=True)
class _Compressor:
    """Station 1 -> 2: the compressor of one block (step 1)."""

    air: Fluid  # humid air per kg of humid air
    y_w: FloatArray  # its water mass fraction [-]
    T2c: FloatArray  # discharge temperature used [K] (safe where rejected)
    p2c: FloatArray  # discharge pressure used [Pa]
    PR: FloatArray  # pressure ratio [-]
    lnPR: FloatArray
    T2s: FloatArray  # isentropic discharge temperature [K]
    h1: FloatArray  # enthalpies [J/kg], real gas
    h2: FloatArray
    h2s: FloatArray
    w_c: FloatArray  # specific work [J/kg]
    eta_c: FloatArray  # isentropic efficiency [-]
    eta_p: FloatArray  # polytropic efficiency [-]
    g_c: BoolArray  # compressor results not computable
    g_pr: BoolArray  # pressure ratio not computable


def _compressor_step(x: Inputs, st: StatusArray, groups: Groups) -> _Compressor:
    """Working fluid from the ambient, then the compressor's efficiencies and work."""
    y_w = humid_air.water_mass_fraction(x.T0, x.p0, x.RH, st)
    air = humid_air.humid_air_fluid(y_w)
    T1, p1 = x.T1, x.p1
    not_hot = ~(x.T2 > T1)
    flag(st, not_hot & ~(x.bT1 | x.bT2), Reason.DISCHARGE_NOT_HOTTER)
    pr_bad = ~(x.p2 > p1)
    flag(st, pr_bad & ~(x.bp1 | x.bp2), Reason.PRESSURE_RATIO_INVALID)
    T2c = np.where(not_hot, T1 + 300.0, x.T2)
    p2c = np.where(pr_bad, p1 * 15.0, x.p2)
    PR = p2c / p1
    lnPR = np.log(PR)
    phi1, cp1 = air.evaluate_with_cp(PHI, T1)
    Rl = air.R * lnPR
    guess = T1 * np.exp(Rl / cp1)
    guess = T1 * np.exp(Rl / air.cp(log_mean(T1, guess)))
    T2s, conv = air.isentropic_T(T1, p1, p2c, guess, lnpr=lnPR, phi1=phi1, groups=groups)
    h1 = air.h(T1, p1)
    vc2 = departure_coefficients(DEPARTURE_H, p2c)
    h2 = air.h_at(T2c, vc2)
    h2s = air.h_at(T2s, vc2)
    w_c = h2 - h1
    eta_c = (h2s - h1) / w_c
    eta_p = Rl / (air.phi(T2c) - phi1)
    g_c = x.g_amb | x.bT1 | x.bp1 | x.bT2 | x.bp2 | not_hot | pr_bad
    g_c = _check_efficiency(st, eta_c, g_c, conv, COMPRESSOR_EFFICIENCY_BAND)
    g_pr = x.bp1 | x.bp2 | pr_bad
    return _Compressor(air, y_w, T2c, p2c, PR, lnPR, T2s, h1, h2, h2s, w_c, eta_c, eta_p, g_c, g_pr)


@dataclass(frozen=True, slots=True)
class _Flow:
    """Shaft power, overall heat balance, air flow and fuel-air ratio (step 2)."""

    P_shaft: FloatArray  # [W]
    q_net: FloatArray  # heat reaching the gas per kg of fuel [J/kg]
    pd: Fluid  # species change of 1 kg of burnt fuel
    h4a: FloatArray  # exhaust enthalpies [J/kg]: air part, burnt-fuel part
    h4pd: FloatArray
    ma_hb: FloatArray  # heat-balance air flow [kg/s]
    g_hb: BoolArray
    use_meas: BoolArray  # measured air flow used
    ma: FloatArray  # air flow used [kg/s]
    g_ma: BoolArray
    f: FloatArray  # fuel-air ratio [-]
    f_st: FloatArray  # stoichiometric fuel-air ratio [-]
    g_f: BoolArray


def _flow_step(x: Inputs, c: _Compressor, fd: FuelData, st: StatusArray) -> _Flow:
    """Air flow from the overall heat balance (or measured), then the fuel-air ratio."""
    P_shaft = x.P / x.eta_gen + x.pmech
    q_net = x.hf + (x.eta_b - x.closs) * x.lhv  # J per kg fuel reaching the gas
    hr4 = departure(DEPARTURE_H, x.T4, x.p4)  # at (T4, p4), shared by the air and the products
    h4a = c.air.evaluate(H, x.T4) + c.air.R * x.T4 * hr4
    pd = Fluid([(fd.tab, 1.0)], fd.R)
    h4pd = pd.h(x.T4) + fd.R * x.T4 * hr4
    ma_hb = (x.mf * (q_net - h4pd) - P_shaft) / (h4a - c.h1)
    g_hb = x.g_amb | x.bT1 | x.bp1 | x.bT4 | x.bp4 | x.g_fp | x.bTf | x.bpar_gen | x.bpar_cb
    hb_bad = ~g_hb & ~(ma_hb > 0)
    flag(st, hb_bad, Reason.ENERGY_BALANCE_INFEASIBLE)
    g_hb |= hb_bad
    use_meas = x.have_ma & ~x.bma
    ma = np.where(use_meas, x.ma, ma_hb) if use_meas.any() else ma_hb
    g_ma = np.where(use_meas, False, g_hb) | x.bma
    ma = np.where(g_ma, SAFE_VALUES["ma"], ma)
    f = x.mf / ma
    f_st = (1.0 - c.y_w) * DRY_AIR_O2_MASS_FRACTION / fd.o2
    rich = ~(f < f_st)
    flag(st, rich & ~(g_ma | x.bmf | x.bfuel), Reason.ENERGY_BALANCE_INFEASIBLE)
    g_f = g_ma | x.bmf | x.bfuel | x.g_amb | rich
    f = np.where(g_f, 0.02, f)
    return _Flow(P_shaft, q_net, pd, h4a, h4pd, ma_hb, g_hb, use_meas, ma, g_ma, f, f_st, g_f)


@dataclass(frozen=True, slots=True)
class _HotSection:
    """Station 2 -> 3 -> 4: combustor and turbine (step 3)."""

    p3: FloatArray  # turbine inlet pressure [Pa]
    T3: FloatArray  # turbine inlet temperature, heat balance [K] (safe where rejected)
    H3: FloatArray  # gas enthalpies per kg of air [J/kg]
    H4: FloatArray
    g_cb: BoolArray
    p4c: FloatArray  # exhaust pressure used [Pa]
    T4s: FloatArray  # isentropic exhaust temperature [K]
    eta_t: FloatArray  # turbine isentropic efficiency [-]
    g_t: BoolArray
    W_c: FloatArray  # compressor and turbine power [W]
    W_t: FloatArray


def _hot_section_step(
    x: Inputs, c: _Compressor, w: _Flow, fd: FuelData, *, st: StatusArray, groups: Groups
) -> _HotSection:
    """Turbine inlet temperature by the combustor balance, then the turbine efficiency."""
    # ---- combustor
    p3 = c.p2c * (1.0 - x.dp)
    gasf = c.air.with_part(fd.tab, w.f, fd.R)
    H3 = c.h2 + w.f * w.q_net  # per kg air
    # first guess: heat release over the gas's cp at the mean of T2 and a rough T3 (about
    # 1290 J/(kg K) per kg gas); within a few K, so Newton needs one step fewer
    dq = w.f * (w.q_net - w.pd.h(c.T2c))  # H3 - h_gas(T2) per kg air
    T3g = np.clip(c.T2c + dq / ((1.0 + w.f) * 1290.0), 300.0, 2900.0)
    T3g += c.T2c
    T3g *= 0.5
    T3g = np.clip(c.T2c + dq / gasf.cp(T3g), 300.0, 2900.0)
    T3, conv3 = gasf.T_from_h(H3, p3, T3g, groups)
    g_cb = c.g_c | w.g_f | x.bTf | x.bpar_cb
    t3_oor = ~g_cb & ~((T3 >= mixtures.T_MIN) & (T3 <= mixtures.T_MAX))
    flag(st, t3_oor, Reason.TEMPERATURE_OUT_OF_RANGE)
    flag(st, ~conv3 & ~g_cb, Reason.NOT_CONVERGED)
    g_cb |= t3_oor | ~conv3
    T3 = np.where(g_cb, 1400.0, T3)
    # ---- turbine
    t_pr_bad = ~(p3 > x.p4)
    flag(st, t_pr_bad & ~(g_cb | x.bp4), Reason.PRESSURE_RATIO_INVALID)
    p4c = np.where(t_pr_bad, p3 / 10.0, x.p4)
    T4s, conv4 = gasf.isentropic_T(T3, p3, p4c, groups=groups)
    H4 = w.h4a + w.f * w.h4pd
    H4s = gasf.h(T4s, p4c)
    eta_t = (H3 - H4) / (H3 - H4s)
    g_t = g_cb | x.bT4 | x.bp4 | t_pr_bad
    g_t = _check_efficiency(st, eta_t, g_t, conv4, TURBINE_EFFICIENCY_BAND)
    W_c = w.ma * c.w_c
    W_t = w.ma * (H3 - H4)
    return _HotSection(p3, T3, H3, H4, g_cb, p4c, T4s, eta_t, g_t, W_c, W_t)


def _heat_rate_step(
    x: Inputs, fd: FuelData, st: StatusArray
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Heat input [W] and the LHV and HHV heat rates [kJ/kWh] (step 4)."""
    Q_in = x.mf * x.lhv
    HR = 3600.0 * Q_in / x.P  # kJ/kWh: (J/s)/(J/s) * 3600 kJ/kWh
    HR_hhv = 3600.0 * x.mf * fd.hhv / x.P
    hr_warn = ~x.g_fp & ~((HEAT_RATE_BAND[0] <= HR) & (HEAT_RATE_BAND[1] >= HR))
    flag(st, hr_warn, Reason.HEAT_RATE_IMPLAUSIBLE)
    return Q_in, HR, HR_hhv


def _comparison_step(
    x: Inputs, c: _Compressor, w: _Flow, t: _HotSection, fd: FuelData, *, groups: Groups
) -> tuple[FloatArray, FloatArray, FloatArray, BoolArray]:
    """Air-standard Brayton, Carnot and the ideal cycle on the real fluid (step 5).

    Returns (eta_Brayton, eta_Carnot, eta_ideal, ideal not computable).
    """
    eta_B = 1.0 - np.exp(c.lnPR * (-0.4 / 1.4))
    carnot = 1.0 - x.T1 / t.T3
    # ideal cycle on the real fluid: isentropic machines, no losses, expansion to p1
    hr3i = departure(DEPARTURE_H, t.T3, c.p2c)
    ha3 = c.air.h(t.T3, None) + c.air.R * t.T3 * hr3i
    hpd3 = w.pd.h(t.T3) + fd.R * t.T3 * hr3i
    f_i = (ha3 - c.h2s) / (x.hf + x.lhv - hpd3)
    f_i = np.where(t.g_cb | ~(f_i > 0) | ~(f_i < w.f_st), 0.02, f_i)
    gas_i = c.air.with_part(fd.tab, f_i, fd.R)
    g4i = t.T4s * ((x.p1 * t.p3) / (c.p2c * t.p4c)) ** 0.25
    T4si, conv_i = gas_i.isentropic_T(t.T3, c.p2c, x.p1, guess=g4i, groups=groups)
    H3i = ha3 + f_i * hpd3
    w_net_i = (H3i - gas_i.h(T4si, x.p1)) - (c.h2s - c.h1)
    eta_i = w_net_i / (f_i * x.lhv)
    return eta_B, carnot, eta_i, t.g_cb | ~conv_i


def _model_correction_step(
    x: Inputs,
    c: _Compressor,
    w: _Flow,
    t: _HotSection,
    fd: FuelData,
    *,
    Q_in: FloatArray,
    HR: FloatArray,
    ref: ReferenceAmbient,
    st: StatusArray,
    groups: Groups,
) -> tuple[FloatArray, FloatArray, BoolArray]:
    """Model-based correction to reference ambient (step 6): (P_corr, HR_corr, bad)."""
    P_model = x.eta_gen * (t.W_t - t.W_c - x.pmech)
    g_model = t.g_t | x.g_fp | x.bpar_gen | ~(P_model > 0)
    P_ref, HR_ref, ok_ref = _forward_reference(
        ref=ref, T1=x.T1, p0=x.p0, p1=x.p1, p4=t.p4c, PR=c.PR, ma=w.ma, eta_c=c.eta_c,
        T3=t.T3, eta_t=t.eta_t, hf=x.hf, lhv=x.lhv, fd=fd, eta_b=x.eta_b, closs=x.closs,
        dp=x.dp, eta_gen=x.eta_gen, pmech=x.pmech, T2s=c.T2s, T4s=t.T4s, groups=groups,
    )  # fmt: skip
    HR_model = 3600.0 * Q_in / P_model
    P_corr_m = x.P * P_ref / P_model
    HR_corr_m = HR * HR_ref / HR_model
    bad_m = g_model | ~ok_ref
    flag(st, bad_m & ~g_model, Reason.CORRECTION_UNAVAILABLE)
    return P_corr_m, HR_corr_m, bad_m


def _chunk(
    m: Mapping[str, FloatArray],
    par: Mapping[str, Num],
    *,
    fd: FuelData,
    h_f: FloatArray | FuelHeat,
    have_ma: BoolArray,
    ref: ReferenceAmbient,
    model_selected: bool,
    curve: bool,
    groups: Groups,
    out: dict[str, FloatArray],
    status: StatusArray,
) -> None:
    """Reconstruct one block into ``out`` (views of the result arrays) and ``status``.

    Steps: input checks, compressor, heat balance and air flow, hot section (combustor and
    turbine), heat rate, comparison cycles, model-based correction, closure and outputs.
    """
    n = status.shape[0]
    st = status
    if isinstance(h_f, FuelHeat):
        m = dict(m)
        nan_Tf = np.isnan(m["Tf"])
        if nan_Tf.any():
            m["Tf"] = np.where(nan_Tf, DEFAULT_FUEL_TEMPERATURE, m["Tf"])
        h_f = (
            np.zeros(n)
            if h_f.zero
            else np.asarray(
                h_f.fuel.sensible_enthalpy(fuel_temperature_used(m["Tf"])), dtype=np.float64
            )
        )
    x = check_inputs(m, par, fd, h_f=h_f, have_ma=have_ma, status=st)
    c = _compressor_step(x, st, groups)
    w = _flow_step(x, c, fd, st)
    t = _hot_section_step(x, c, w, fd, st=st, groups=groups)
    Q_in, HR, HR_hhv = _heat_rate_step(x, fd, st)
    eta_B, carnot, eta_i, g_i = _comparison_step(x, c, w, t, fd, groups=groups)
    P_corr_m, HR_corr_m, bad_m = _model_correction_step(
        x, c, w, t, fd, Q_in=Q_in, HR=HR, ref=ref, st=st, groups=groups
    )
    # ---- closure with a measured air flow, outputs
    closure = (
        w.P_shaft + x.closs * Q_in + w.ma * t.H4 - w.ma * c.h1 - x.mf * (x.hf + x.eta_b * x.lhv)
    ) / Q_in
    g_clos = ~w.use_meas | w.g_hb | w.g_ma

    def put(name: str, v: Num, bad: BoolArray) -> None:
        dst = out[name]
        np.copyto(dst, v)
        if bad.any():
            np.copyto(dst, np.nan, where=bad)

    g_fp = x.g_fp
    put("compressor_pressure_ratio", c.PR, c.g_pr)
    put("compressor_isentropic_efficiency", c.eta_c, c.g_c)
    put("compressor_polytropic_efficiency", c.eta_p, c.g_c)
    put("compressor_specific_work", c.w_c, c.g_c)
    put("compressor_isentropic_discharge_temperature", c.T2s, c.g_c)
    put("compressor_power", t.W_c, c.g_c | w.g_ma)
    put("air_mass_flow", w.ma, w.g_ma)
    put("heat_balance_air_mass_flow", w.ma_hb, w.g_hb)
    put("fuel_air_ratio", w.f, w.g_f)
    put("exhaust_mass_flow", w.ma + x.mf, w.g_f)
    put("turbine_inlet_temperature", t.T3, t.g_cb)
    put("turbine_inlet_pressure", x.p2 * (1.0 - x.dp), x.bp2 | x.bpar_cb)
    put("turbine_isentropic_efficiency", t.eta_t, t.g_t)
    put("turbine_isentropic_exhaust_temperature", t.T4s, t.g_t)
    put("turbine_power", t.W_t, t.g_t)
    put("shaft_power", w.P_shaft, x.bP | x.bpar_gen)
    put("heat_input", Q_in, x.bmf | x.bfuel)
    put("heat_rate_lhv_kj_per_kwh", HR, g_fp)
    put("heat_rate_hhv_kj_per_kwh", HR_hhv, g_fp)
    put("thermal_efficiency", x.P / Q_in, g_fp)
    put("back_work_ratio", t.W_c / t.W_t, t.g_t)
    put("ideal_brayton_efficiency", eta_B, c.g_pr)
    put("ideal_cycle_efficiency", eta_i, g_i)
    put("carnot_efficiency", carnot, t.g_cb)
    put("heat_balance_closure", closure, g_clos)
    put("corrected_power_model", P_corr_m, bad_m)
    put("corrected_heat_rate_lhv_model_kj_per_kwh", HR_corr_m, bad_m)
    if model_selected:
        for k in ("corrected_power", "corrected_heat_rate_lhv_kj_per_kwh"):
            np.copyto(out[k], out[_MODEL_OF[k]])
    if curve:
        out["_T1"][:] = x.T1
        out["_p0"][:] = x.p0
        out["_RH"][:] = x.RH
        out["_curve_bad"][:] = x.bT1 | x.bp0 | x.bRH | g_fp


def _forward_reference(
    *,
    ref: ReferenceAmbient,
    T1: FloatArray,
    p0: FloatArray,
    p1: FloatArray,
    p4: FloatArray,
    PR: FloatArray,
    ma: FloatArray,
    eta_c: FloatArray,
    T3: FloatArray,
    eta_t: FloatArray,
    hf: FloatArray,
    lhv: Num,
    fd: FuelData,
    eta_b: Num,
    closs: Num,
    dp: Num,
    eta_gen: Num,
    pmech: Num,
    T2s: FloatArray,
    T4s: FloatArray,
    groups: Groups,
) -> tuple[FloatArray, FloatArray, NDArray[np.bool_]]:
    """Return the generator power and heat rate at reference ambient under the control law.

    ``T2s`` and ``T4s`` of the measured cycle seed the Newton solves.
    """
    T1r = REFERENCE_TEMPERATURE
    p1r = REFERENCE_PRESSURE * (p1 / p0)
    p4r = REFERENCE_PRESSURE * (p4 / p0)
    PRr, mar = reference_operating_point(
        compressor_inlet_temperature=T1,
        compressor_inlet_pressure=p1,
        pressure_ratio=PR,
        air_mass_flow=ma,
        reference_inlet_temperature=T1r,
        reference_inlet_pressure=p1r,
    )
    st = np.zeros(T1.shape, dtype=np.uint32)
    res = forward_cycle(
        air=ref.air,
        y_w=ref.y_w,
        T1=np.asarray(T1r),
        p1=p1r,
        p2=PRr * p1r,
        p4=p4r,
        eta_c=eta_c,
        T3=T3,
        eta_t=eta_t,
        ma=mar,
        hf=hf,
        lhv=lhv,
        fd=fd,
        eta_b=eta_b,
        closs=closs,
        dp=dp,
        eta_gen=eta_gen,
        pmech=pmech,
        temperatures=False,
        status=st,
        guesses=(
            T2s * (T1r / T1) ** 0.72,  # T2s ∝ T1 r^0.28 and r ∝ T1
            T4s * (T1r / T1) ** 0.25,  # T4s ∝ (p4/p3)^0.25
        ),
        groups=groups,
    )
    P = res["generator_power"]
    HR = 3600.0 * res["fuel_mass_flow"] * lhv / P
    ok = (st == 0) & (P > 0)
    return P, HR, ok


# ============================================================================================
# Public API
# ============================================================================================
_MEAS_KEYS = {
    "ambient_temperature": "T0",
    "ambient_pressure": "p0",
    "ambient_relative_humidity": "RH",
    "compressor_inlet_temperature": "T1",
    "compressor_inlet_pressure": "p1",
    "compressor_discharge_temperature": "T2",
    "compressor_discharge_pressure": "p2",
    "exhaust_temperature": "T4",
    "exhaust_pressure": "p4",
    "fuel_mass_flow": "mf",
    "generator_power": "P",
}


def _par(v: ArrayLike, n: int) -> Num:
    """Return a unit parameter: a Python float when scalar, else an array of shape (N,)."""
    a = np.asarray(v, dtype=np.float64)
    return float(a) if a.ndim == 0 else _arr(a, n)


def _arr(v: ArrayLike | None, n: int, default: float = np.nan) -> FloatArray:
    if v is None:
        return np.broadcast_to(np.float64(default), (n,))  # read only, no memory
    a = np.asarray(v, dtype=np.float64)
    if a.ndim > 1 or (a.ndim == 1 and a.shape[0] != n):
        raise ModelInputError("measurement", a.shape, f"a scalar or shape ({n},)")
    return np.broadcast_to(a, (n,))


def reconstruct(
    *,
    ambient_temperature: ArrayLike,
    ambient_pressure: ArrayLike,
    ambient_relative_humidity: ArrayLike,
    compressor_inlet_temperature: ArrayLike,
    compressor_inlet_pressure: ArrayLike,
    compressor_discharge_temperature: ArrayLike,
    compressor_discharge_pressure: ArrayLike,
    exhaust_temperature: ArrayLike,
    exhaust_pressure: ArrayLike,
    fuel_mass_flow: ArrayLike,
    generator_power: ArrayLike,
    fuel: FuelProperties,
    air_mass_flow: ArrayLike | None = None,
    fuel_temperature: ArrayLike | None = None,
    generator_efficiency: ArrayLike = DEFAULT_PARAMETERS["generator_efficiency"],
    combustor_pressure_loss: ArrayLike = DEFAULT_PARAMETERS["combustor_pressure_loss"],
    combustion_efficiency: ArrayLike = DEFAULT_PARAMETERS["combustion_efficiency"],
    casing_heat_loss_fraction: ArrayLike = DEFAULT_PARAMETERS["casing_heat_loss_fraction"],
    mechanical_loss: ArrayLike = DEFAULT_PARAMETERS["mechanical_loss"],
    corrections: CorrectionTables | None = None,
    correction_method: Literal["auto", "model", "curve"] = "auto",
    chunk_size: int = _CHUNK,
) -> ComputeOutput:
    r"""Reconstruct the actual Brayton cycle of a gas turbine from plant measurements.

    Parameters
    ----------
    ambient_temperature : array_like
        T0 [K].
    ambient_pressure : array_like
        p0 [Pa], absolute.
    ambient_relative_humidity : array_like
        RH [-], fraction 0..1.
    compressor_inlet_temperature, compressor_inlet_pressure : array_like
        T1 [K], p1 [Pa].
    compressor_discharge_temperature, compressor_discharge_pressure : array_like
        T2 [K], p2 [Pa].
    exhaust_temperature, exhaust_pressure : array_like
        T4 [K], p4 [Pa].
    fuel_mass_flow : array_like
        m_f [kg/s].
    generator_power : array_like
        P_gen [W].
    fuel : FuelProperties
        From :func:`models.properties.fuel.gas_fuel` or :func:`models.properties.fuel.liquid_fuel`;
        one fuel or a batch of the same length N.
    air_mass_flow : array_like, optional
        Measured m_a [kg/s]; NaN elements (or None) use the heat balance.
    fuel_temperature : array_like, optional
        T_f [K]; NaN elements (or None) use :data:`DEFAULT_FUEL_TEMPERATURE`.
    generator_efficiency, combustor_pressure_loss, combustion_efficiency,
    casing_heat_loss_fraction, mechanical_loss : array_like, optional
        Unit parameters (:data:`DEFAULT_PARAMETERS`): [-], [-] (of p2), [-], [-] (of m_f LHV), [W].
    corrections : CorrectionTables, optional
        Unit-supplied correction curves for the curve-based correction.
    correction_method : {"auto", "model", "curve"}
        Which correction fills ``corrected_power``/``corrected_heat_rate_lhv_kj_per_kwh``:
        "auto" takes "curve" when ``corrections`` is given, else "model".
    chunk_size : int
        Elements per chunk of the vectorised kernel (default 4096): the Newton solves of a
        chunk stop together.  Array operations run on blocks of whole chunks (about 8192
        elements); the results are those of one chunk at a time.

    Returns
    -------
    ComputeOutput
        ``values`` (the result names of :data:`GAS_TURBINE`, shape (N,), NaN where not
        computable), ``status`` (Reason bits), ``labels`` (``correction_method``),
        ``label_arrays`` (``air_mass_flow_source``: "measured" or "heat_balance").

    Notes
    -----
    .. math::

        m_a = \frac{m_f \left(h_f + (\eta_b - c_{loss}) LHV - h_{pd}(T_4, p_4)\right) - P_{shaft}}
            {h_a(T_4, p_4) - h_a(T_1, p_1)}

        \eta_c = \frac{h_{2s} - h_1}{h_2 - h_1}, \qquad \eta_t = \frac{h_3 - h_4}{h_3 - h_{4s}},
        \qquad HR = \frac{3600\, m_f\, LHV}{P_{gen}}

    Equations in the module docstring and ``docs/method.md``.  Each result is NaN only where
    its own inputs fail: a missing discharge temperature leaves the heat rate and the
    heat-balance air flow intact.  Warnings (value kept): EFFICIENCY_IMPLAUSIBLE,
    HEAT_RATE_IMPLAUSIBLE, HUMIDITY_SATURATED, CORRECTION_UNAVAILABLE.

    References
    ----------
    .. [1] ASME PTC 22-2014, Performance Test Code on Gas Turbines, section 5 (heat balance
       determination of exhaust flow).
    .. [2] ISO 2314:2009, Gas turbines — Acceptance tests (reference turbine inlet
       temperature).
    .. [3] H. I. H. Saravanamuttoo et al., *Gas Turbine Theory*, 7th ed., Pearson, 2017,
       ch. 2 and 9.

    Examples
    --------
    >>> from models.properties.fuel import gas_fuel
    >>> out = reconstruct(ambient_temperature=288.15, ambient_pressure=101325.0,
    ...     ambient_relative_humidity=0.6, compressor_inlet_temperature=288.15,
    ...     compressor_inlet_pressure=100300.0, compressor_discharge_temperature=660.0,
    ...     compressor_discharge_pressure=1.5e6, exhaust_temperature=820.0,
    ...     exhaust_pressure=104000.0, fuel_mass_flow=2.6, generator_power=45.0e6,
    ...     fuel=gas_fuel({"CH4": 1.0}))
    >>> round(float(out.values["heat_rate_lhv_kj_per_kwh"][0]))
    10406
    """
    if correction_method not in ("auto", "model", "curve"):
        raise ModelInputError("correction_method", correction_method, '"auto", "model", "curve"')
    inputs = {
        "ambient_temperature": ambient_temperature,
        "ambient_pressure": ambient_pressure,
        "ambient_relative_humidity": ambient_relative_humidity,
        "compressor_inlet_temperature": compressor_inlet_temperature,
        "compressor_inlet_pressure": compressor_inlet_pressure,
        "compressor_discharge_temperature": compressor_discharge_temperature,
        "compressor_discharge_pressure": compressor_discharge_pressure,
        "exhaust_temperature": exhaust_temperature,
        "exhaust_pressure": exhaust_pressure,
        "fuel_mass_flow": fuel_mass_flow,
        "generator_power": generator_power,
    }
    shapes = [np.asarray(v).shape for v in inputs.values()]
    shapes.extend(np.asarray(o).shape for o in (air_mass_flow, fuel_temperature) if o is not None)
    shapes.append(fuel.lhv.shape)
    try:
        bshape = np.broadcast_shapes(*shapes)
    except ValueError as exc:
        raise ModelInputError("measurements", shapes, "one common shape (N,)") from exc
    if len(bshape) > 1:
        raise ModelInputError("measurements", bshape, "scalars or 1-D arrays (N,)")
    n = int(bshape[0]) if bshape else 1
    m = {_MEAS_KEYS[k]: _arr(v, n) for k, v in inputs.items()}
    ma_in = _arr(air_mass_flow, n)
    have_ma = ~np.isnan(ma_in)
    m["ma"] = ma_in
    Tf = _arr(fuel_temperature, n)
    step = max(int(chunk_size), 1)
    par = {
        "generator_efficiency": _par(generator_efficiency, n),
        "combustor_pressure_loss": _par(combustor_pressure_loss, n),
        "combustion_efficiency": _par(combustion_efficiency, n),
        "casing_heat_loss_fraction": _par(casing_heat_loss_fraction, n),
        "mechanical_loss": _par(mechanical_loss, n),
    }
    fd = fuel_data(fuel, n)
    hf_src: FuelHeat | FloatArray
    if fuel.lhv.ndim == 0:
        # one fuel: its sensible enthalpy chunk by chunk (no full-size temporaries); the
        # h_f = 0 shortcut of _fuel_enthalpy still decided over the whole batch
        m["Tf"] = Tf
        zero = fuel_temperature is None or all(
            np.all(fuel_temperature_used(Tf[i : i + step]) == mixtures.T_REF)
            for i in range(0, n, step)
        )
        hf_src = FuelHeat(fuel, zero)
    else:
        Tf = np.where(np.isnan(Tf), DEFAULT_FUEL_TEMPERATURE, Tf)
        m["Tf"] = Tf
        hf_src = np.broadcast_to(fuel_enthalpy(fuel, fuel_temperature_used(Tf)), (n,))

    method = correction_method
    if method == "auto":
        method = "curve" if corrections is not None else "model"
    curve = corrections is not None  # curve inputs are kept only when there are curves
    names = [k for k in RESULT_NAMES if k not in _CURVE_RESULTS]
    if curve:
        names += ["_T1", "_p0", "_RH", "_curve_bad"]
    out = {k: np.empty(n) for k in names}
    status = np.zeros(n, dtype=np.uint32)
    ref = reference_ambient()
    # scalar parameters stay Python floats (same arithmetic, no per-chunk slicing)
    # blocks of several chunks; every chunk still converges on its own (kernel.newton)
    block = step * max(1, _BLOCK // step)
    with np.errstate(all="ignore"):
        for i0 in range(0, n, block):
            sl = slice(i0, min(i0 + block, n))
            starts = np.arange(0, sl.stop - sl.start, step)
            _chunk(
                {k: v[sl] for k, v in m.items()},
                {k: v if isinstance(v, float) else v[sl] for k, v in par.items()},
                fd=fd.take(sl),
                h_f=hf_src if isinstance(hf_src, FuelHeat) else hf_src[sl],
                have_ma=have_ma[sl],
                ref=ref,
                model_selected=method != "curve",
                curve=curve,
                groups=starts if starts.size > 1 else None,
                out={k: v[sl] for k, v in out.items()},
                status=status[sl],
            )
        if curve:
            Pc, HRc, st_c = curve_correction(
                corrections,
                compressor_inlet_temperature=out.pop("_T1"),
                ambient_pressure=out.pop("_p0"),
                ambient_relative_humidity=out.pop("_RH"),
                power=m["P"],
                heat_rate=out["heat_rate_lhv_kj_per_kwh"],
            )
            curve_bad = out.pop("_curve_bad") > 0
            out["corrected_power_curve"] = np.where(curve_bad, np.nan, Pc)
            out["corrected_heat_rate_lhv_curve_kj_per_kwh"] = np.where(curve_bad, np.nan, HRc)
            if method == "curve":
                status |= st_c & np.uint32(Reason.CORRECTION_UNAVAILABLE)
        else:
            # curve_correction(None, ...): NaN and CORRECTION_UNAVAILABLE everywhere
            out["corrected_power_curve"] = np.full(n, np.nan)
            out["corrected_heat_rate_lhv_curve_kj_per_kwh"] = np.full(n, np.nan)
            if method == "curve":
                status |= np.uint32(Reason.CORRECTION_UNAVAILABLE)
    if method == "curve":
        out["corrected_power"] = out["corrected_power_curve"].copy()
        out["corrected_heat_rate_lhv_kj_per_kwh"] = out[
            "corrected_heat_rate_lhv_curve_kj_per_kwh"
        ].copy()
    out = {k: out[k] for k in RESULT_NAMES}  # the documented order
    # one small lookup table indexed by a uint8 code (same "<U12" strings as np.where, without
    # broadcasting the two string scalars over the batch)
    source = _SOURCE_LABELS.take((~have_ma).view(np.uint8))
    return ComputeOutput(
        values=out,
        status=status,
        labels={"correction_method": method},
        label_arrays={"air_mass_flow_source": source},
    )

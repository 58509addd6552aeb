"""Whole-cycle reconstruction of a single-shaft gas turbine, and the ``GAS_TURBINE`` unit type.

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
tables of each chunk built once (dry air + water + burnt fuel as three basis fluids) and
Newton solves that stop when the whole chunk has converged.  :mod:`models.components.compressor`,
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
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.components.compressor import COMPRESSOR_EFFICIENCY_BAND
from models.components.turbine import TURBINE_EFFICIENCY_BAND
from models.correction.gas_turbine import (
    REFERENCE_PRESSURE,
    REFERENCE_RELATIVE_HUMIDITY,
    REFERENCE_TEMPERATURE,
    CorrectionTables,
    curve_correction,
    reference_operating_point,
)
from models.properties import humid_air, mixtures
from models.properties import thermo_data as _td
from models.properties.fuel import FuelProperties
from models.properties.kernel import (
    DEPARTURE_H,
    PHI,
    SPECIES_ROWS,
    Fluid,
    Groups,
    H,
    departure,
    departure_coefficients,
    log_mean,
)
from models.properties.species import INDEX, N_SPECIES
from models.status import ModelInputError, Reason
from models.units.base import ComputeOutput, FieldSpec

__all__ = [
    "COMPRESSOR_EFFICIENCY_BAND",
    "DEFAULT_FUEL_TEMPERATURE",
    "DEFAULT_PARAMETERS",
    "GAS_TURBINE",
    "HEAT_RATE_BAND",
    "TURBINE_EFFICIENCY_BAND",
    "GasTurbineType",
    "reconstruct",
    "simulate",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]
Num = float | FloatArray

#: Fuel temperature assumed when none is measured [K]: the heating-value reference 25 °C, so
#: the fuel's sensible enthalpy is zero.  A gas preheated to 180 °C but not measured makes
#: the heat input about 0.5 % low.
DEFAULT_FUEL_TEMPERATURE: float = 298.15

#: Unit parameters and their defaults (glossary names).
DEFAULT_PARAMETERS: Mapping[str, float] = {
    "generator_efficiency": 0.985,
    "combustor_pressure_loss": 0.04,
    "combustion_efficiency": 0.995,
    "casing_heat_loss_fraction": 0.005,
    "mechanical_loss": 0.0,
}

#: Plausible simple-cycle heat rate, LHV basis [kJ/kWh] (common practice: heavy-duty units
#: 8 600-11 000, aeroderivatives from about 8 000, small old units up to about 14 000).
HEAT_RATE_BAND: tuple[float, float] = (8000.0, 14000.0)

_CHUNK = 4096
_BLOCK = 8192  # elements per array operation (several chunks)


def _flag(status: StatusArray, mask: NDArray[np.bool_], reason: Reason) -> None:
    np.bitwise_or(status, np.uint32(reason), out=status, where=mask)


_MW = np.asarray(_td.MOLAR_MASS, dtype=np.float64)
_Y_O2_DRY = float(humid_air.DRY_AIR_MASS_FRACTIONS[INDEX["O2"]])


@dataclass(frozen=True)
class _FuelData:
    lhv: FloatArray  # (N,) or ()
    hhv: FloatArray
    tab: FloatArray  # (2, 17) or (2, 17, N): rows of the species change per kg fuel
    R: FloatArray  # gas constant of the species change [J/(kg_fuel K)]
    o2: FloatArray  # O2 consumed per kg fuel [kg/kg] (> 0)
    valid: NDArray[np.bool_]

    def take(self, sl: slice) -> _FuelData:
        if self.lhv.ndim == 0:
            return self
        return _FuelData(
            self.lhv[sl], self.hhv[sl], self.tab[..., sl], self.R[sl], self.o2[sl], self.valid[sl]
        )


def _fuel_data(fuel: FuelProperties, n: int) -> _FuelData:
    pd = np.asarray(fuel.product_delta, dtype=np.float64)
    lhv = np.asarray(fuel.lhv, dtype=np.float64)
    hhv = np.asarray(fuel.hhv, dtype=np.float64)
    if pd.shape[-1] != N_SPECIES or pd.ndim > 2:
        raise ModelInputError("fuel.product_delta", pd.shape, f"(N_SPECIES,) or (N, {N_SPECIES})")
    if pd.ndim == 2 and pd.shape[0] != n:
        raise ModelInputError("fuel", pd.shape[0], f"a single fuel or a batch of {n}")
    tab = np.einsum("...s,rsk->rk...", pd, SPECIES_ROWS)
    R = np.asarray(mixtures.R_UNIVERSAL * (pd @ (1.0 / _MW)))
    o2 = np.asarray(-pd[..., INDEX["O2"]])
    valid = np.asarray(np.isfinite(lhv) & (lhv > 0) & np.isfinite(hhv) & (o2 > 0))
    return _FuelData(lhv, hhv, tab, R, o2, valid)


@dataclass(frozen=True)
class _FuelHeat:
    """A single fuel whose sensible enthalpy each chunk evaluates itself."""

    fuel: FuelProperties
    zero: bool  # every fuel temperature used is 298.15 K: h_f = 0 exactly


def _fuel_T_used(Tf: FloatArray) -> FloatArray:
    """Fuel temperature the enthalpy is evaluated at: default for NaN, 298.15 K if invalid."""
    T = np.where(np.isnan(Tf), DEFAULT_FUEL_TEMPERATURE, Tf)
    return np.where((T >= mixtures.T_MIN) & (T <= mixtures.T_MAX), T, mixtures.T_REF)


def _fuel_enthalpy(fuel: FuelProperties, Tf: FloatArray) -> FloatArray:
    """Sensible enthalpy of the fuel at Tf [J/kg], 0 at 298.15 K, NaN where Tf is NaN."""
    if np.all(Tf == mixtures.T_REF):
        return np.zeros(Tf.shape)
    return np.asarray(fuel.sensible_enthalpy(Tf), dtype=np.float64)


# ============================================================================================
# Input checking
# ============================================================================================
_SAFE = {  # values substituted for rejected elements so the solvers stay in range
    "T0": 288.15,
    "p0": 101325.0,
    "RH": 0.6,
    "T1": 288.15,
    "p1": 101325.0,
    "T2": 650.0,
    "p2": 1.5e6,
    "T4": 800.0,
    "p4": 103000.0,
    "mf": 2.5,
    "P": 40.0e6,
    "ma": 120.0,
    "Tf": 298.15,
}


def _check(
    x: FloatArray,
    status: StatusArray,
    *,
    lo: float = 0.0,
    hi: float = np.inf,
    rng: tuple[float, float] | None = None,
    rng_reason: Reason = Reason.TEMPERATURE_OUT_OF_RANGE,
) -> NDArray[np.bool_]:
    """Flag NaN (INPUT_MISSING), x <= lo or x > hi (INPUT_NONPHYSICAL), outside rng."""
    a, b = (max(lo, rng[0]), min(hi, rng[1])) if rng is not None else (lo, hi)
    fine = (x > lo) & (x <= hi) if rng is None else (x >= a) & (x <= b) & (x > lo)
    if fine.all():
        return ~fine
    miss = np.isnan(x)
    bad = miss.copy()
    _flag(status, miss, Reason.INPUT_MISSING)
    nonphys = ~miss & ~((x > lo) & (x <= hi))
    _flag(status, nonphys, Reason.INPUT_NONPHYSICAL)
    bad |= nonphys
    if rng is not None:
        out = ~bad & ~((x >= rng[0]) & (x <= rng[1]))
        _flag(status, out, rng_reason)
        bad |= out
    return bad


# ============================================================================================
# Reconstruction of one chunk
# ============================================================================================
_RESULTS = (
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


@dataclass(frozen=True)
class _RefAmbient:
    """Constants of the reference ambient, computed once per call."""

    y_w: float  # water mass fraction of reference humid air
    air: Fluid  # reference humid air (scalar coefficient rows, cached across chunks)


def _reference_ambient() -> _RefAmbient:
    y_w = float(
        humid_air.water_mass_fraction(
            np.array(REFERENCE_TEMPERATURE),
            np.array(REFERENCE_PRESSURE),
            np.array(REFERENCE_RELATIVE_HUMIDITY),
            np.zeros((), dtype=np.uint32),
        )
    )
    return _RefAmbient(y_w, humid_air.humid_air_fluid(y_w))


def _chunk(
    m: Mapping[str, FloatArray],
    par: Mapping[str, Num],
    *,
    fd: _FuelData,
    h_f: FloatArray | _FuelHeat,
    have_ma: NDArray[np.bool_],
    ref: _RefAmbient,
    model_selected: bool,
    curve: bool,
    groups: Groups,
    out: dict[str, FloatArray],
    status: StatusArray,
) -> None:
    n = status.shape[0]
    st = status
    if isinstance(h_f, _FuelHeat):
        m = dict(m)
        nan_Tf = np.isnan(m["Tf"])
        if nan_Tf.any():
            m["Tf"] = np.where(nan_Tf, DEFAULT_FUEL_TEMPERATURE, m["Tf"])
        h_f = (
            np.zeros(n)
            if h_f.zero
            else np.asarray(h_f.fuel.sensible_enthalpy(_fuel_T_used(m["Tf"])), dtype=np.float64)
        )
    # ---- input checks, per quantity -------------------------------------------------------
    Tr = (mixtures.T_MIN, mixtures.T_MAX)
    pr = (0.0, mixtures.P_MAX_REAL)
    bT0 = _check(m["T0"], st, rng=Tr)
    bp0 = _check(m["p0"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bRH = _check(m["RH"], st, lo=-1e-300, hi=1.0 + humid_air.RH_TOLERANCE)
    bT1 = _check(m["T1"], st, rng=Tr)
    bp1 = _check(m["p1"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bT2 = _check(m["T2"], st, rng=Tr)
    bp2 = _check(m["p2"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bT4 = _check(m["T4"], st, rng=Tr)
    bp4 = _check(m["p4"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bmf = _check(m["mf"], st)
    bP = _check(m["P"], st)
    bTf = _check(m["Tf"], st, rng=Tr)
    bma = np.zeros(n, dtype=bool)
    if have_ma.any():
        bma = have_ma & _check(np.where(have_ma, m["ma"], 1.0), st)
    eta_gen, dp, eta_b, closs, pmech = (
        par["generator_efficiency"],
        par["combustor_pressure_loss"],
        par["combustion_efficiency"],
        par["casing_heat_loss_fraction"],
        par["mechanical_loss"],
    )
    a_gen, a_dp, a_b, a_cl, a_pm = (np.asarray(v) for v in (eta_gen, dp, eta_b, closs, pmech))
    bpar_gen = np.broadcast_to(~((a_gen > 0) & (a_gen <= 1)) | ~(a_pm >= 0), (n,))
    bpar_cb = np.broadcast_to(
        ~((a_b > 0) & (a_b <= 1)) | ~((a_cl >= 0) & (a_cl < 1)) | ~((a_dp >= 0) & (a_dp < 1)),
        (n,),
    )
    _flag(st, bpar_gen | bpar_cb, Reason.INPUT_NONPHYSICAL)
    bfuel = ~fd.valid
    _flag(st, np.broadcast_to(bfuel, (n,)), Reason.FUEL_INVALID)

    def safe(key: str, bad: NDArray[np.bool_]) -> FloatArray:
        v = m[key]
        return np.where(bad, _SAFE[key], v) if bad.any() else v

    T0, p0, RH = safe("T0", bT0), safe("p0", bp0), safe("RH", bRH)
    T1, p1, T2, p2 = safe("T1", bT1), safe("p1", bp1), safe("T2", bT2), safe("p2", bp2)
    T4, p4, mf, P = safe("T4", bT4), safe("p4", bp4), safe("mf", bmf), safe("P", bP)
    lhv = np.where(bfuel, 50.0e6, fd.lhv) if np.any(bfuel) else fd.lhv
    hf = np.where(bTf, 0.0, h_f) if bTf.any() else h_f
    g_amb = bT0 | bp0 | bRH
    g_fp = bmf | bP | bfuel  # heat rate

    # ---- working fluid --------------------------------------------------------------------
    y_w = humid_air.water_mass_fraction(T0, p0, RH, st)
    air = humid_air.humid_air_fluid(y_w)
    R_a = air.R

    # ---- compressor -----------------------------------------------------------------------
    not_hot = ~(T2 > T1)
    _flag(st, not_hot & ~(bT1 | bT2), Reason.DISCHARGE_NOT_HOTTER)
    pr_bad = ~(p2 > p1)
    _flag(st, pr_bad & ~(bp1 | bp2), Reason.PRESSURE_RATIO_INVALID)
    T2c = np.where(not_hot, T1 + 300.0, T2)
    p2c = np.where(pr_bad, p1 * 15.0, p2)
    PR = p2c / p1
    lnPR = np.log(PR)
    phi1, cp1 = air.evaluate_with_cp(PHI, T1)
    Rl = R_a * lnPR
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
    g_c = g_amb | bT1 | bp1 | bT2 | bp2 | not_hot | pr_bad
    _flag(st, ~conv & ~g_c, Reason.NOT_CONVERGED)
    g_c |= ~conv
    eff_bad = ~g_c & ~((eta_c > 0) & (eta_c <= 1))
    _flag(st, eff_bad, Reason.EFFICIENCY_OUT_OF_RANGE)
    g_c |= eff_bad
    lo, hi = COMPRESSOR_EFFICIENCY_BAND
    _flag(st, ~g_c & ~((eta_c >= lo) & (eta_c <= hi)), Reason.EFFICIENCY_IMPLAUSIBLE)
    g_pr = bp1 | bp2 | pr_bad

    # ---- shaft power and heat balance -----------------------------------------------------
    P_shaft = P / eta_gen + pmech
    q_net = hf + (eta_b - closs) * lhv  # J per kg fuel reaching the gas
    hr4 = departure(
        DEPARTURE_H, T4, p4
    )  # departure at (T4, p4), shared by the air and the products
    h4a = air.evaluate(H, T4) + R_a * T4 * hr4
    pd = Fluid([(fd.tab, 1.0)], fd.R)
    h4pd = pd.h(T4) + fd.R * T4 * hr4
    ma_hb = (mf * (q_net - h4pd) - P_shaft) / (h4a - h1)
    g_hb = g_amb | bT1 | bp1 | bT4 | bp4 | g_fp | bTf | bpar_gen | bpar_cb
    hb_bad = ~g_hb & ~(ma_hb > 0)
    _flag(st, hb_bad, Reason.ENERGY_BALANCE_INFEASIBLE)
    g_hb |= hb_bad

    use_meas = have_ma & ~bma
    ma = np.where(use_meas, m["ma"], ma_hb) if use_meas.any() else ma_hb
    g_ma = np.where(use_meas, False, g_hb) | bma
    ma = np.where(g_ma, _SAFE["ma"], ma)
    f = mf / ma
    f_st = (1.0 - y_w) * _Y_O2_DRY / fd.o2
    rich = ~(f < f_st)
    _flag(st, rich & ~(g_ma | bmf | bfuel), Reason.ENERGY_BALANCE_INFEASIBLE)
    g_f = g_ma | bmf | bfuel | g_amb | rich
    f = np.where(g_f, 0.02, f)

    # ---- combustor ------------------------------------------------------------------------
    p3 = p2c * (1.0 - dp)
    gasf = air.with_part(fd.tab, f, fd.R)
    H3 = h2 + f * q_net  # per kg air
    # first guess: heat release over the gas's cp at the mean of T2 and a rough T3 (about
    # 1290 J/(kg K) per kg gas); within a few K, so Newton needs one step fewer
    dq = f * (q_net - pd.h(T2c))  # H3 - h_gas(T2) per kg air
    T3g = np.clip(T2c + dq / ((1.0 + f) * 1290.0), 300.0, 2900.0)
    T3g += T2c
    T3g *= 0.5
    T3g = np.clip(T2c + dq / gasf.cp(T3g), 300.0, 2900.0)
    T3, conv3 = gasf.T_from_h(H3, p3, T3g, groups)
    g_cb = g_c | g_f | bTf | bpar_cb
    t3_oor = ~g_cb & ~((T3 >= mixtures.T_MIN) & (T3 <= mixtures.T_MAX))
    _flag(st, t3_oor, Reason.TEMPERATURE_OUT_OF_RANGE)
    _flag(st, ~conv3 & ~g_cb, Reason.NOT_CONVERGED)
    g_cb |= t3_oor | ~conv3
    T3 = np.where(g_cb, 1400.0, T3)

    # ---- turbine ----------------------------------------------------------------------------
    t_pr_bad = ~(p3 > p4)
    _flag(st, t_pr_bad & ~(g_cb | bp4), Reason.PRESSURE_RATIO_INVALID)
    p4c = np.where(t_pr_bad, p3 / 10.0, p4)
    T4s, conv4 = gasf.isentropic_T(T3, p3, p4c, groups=groups)
    H4 = h4a + f * h4pd
    H4s = gasf.h(T4s, p4c)
    eta_t = (H3 - H4) / (H3 - H4s)
    g_t = g_cb | bT4 | bp4 | t_pr_bad
    _flag(st, ~conv4 & ~g_t, Reason.NOT_CONVERGED)
    g_t |= ~conv4
    t_eff_bad = ~g_t & ~((eta_t > 0) & (eta_t <= 1))
    _flag(st, t_eff_bad, Reason.EFFICIENCY_OUT_OF_RANGE)
    g_t |= t_eff_bad
    lo, hi = TURBINE_EFFICIENCY_BAND
    _flag(st, ~g_t & ~((eta_t >= lo) & (eta_t <= hi)), Reason.EFFICIENCY_IMPLAUSIBLE)
    W_c = ma * w_c
    W_t = ma * (H3 - H4)

    # ---- heat rate ----------------------------------------------------------------------------
    Q_in = mf * lhv
    HR = 3600.0 * Q_in / P  # kJ/kWh: (J/s)/(J/s) * 3600 kJ/kWh
    HR_hhv = 3600.0 * mf * fd.hhv / P
    hr_warn = ~g_fp & ~((HEAT_RATE_BAND[0] <= HR) & (HEAT_RATE_BAND[1] >= HR))
    _flag(st, hr_warn, Reason.HEAT_RATE_IMPLAUSIBLE)
    g_gen = g_fp | bpar_gen

    # ---- comparison cycles ------------------------------------------------------------------
    eta_B = 1.0 - np.exp(lnPR * (-0.4 / 1.4))
    carnot = 1.0 - T1 / T3
    # ideal cycle on the real fluid: isentropic machines, no losses, expansion to p1
    hr3i = departure(DEPARTURE_H, T3, p2c)
    ha3 = air.h(T3, None) + R_a * T3 * hr3i
    hpd3 = pd.h(T3) + fd.R * T3 * hr3i
    f_i = (ha3 - h2s) / (hf + lhv - hpd3)
    f_i = np.where(g_cb | ~(f_i > 0) | ~(f_i < f_st), 0.02, f_i)
    gas_i = air.with_part(fd.tab, f_i, fd.R)
    g4i = T4s * ((p1 * p3) / (p2c * p4c)) ** 0.25
    T4si, conv_i = gas_i.isentropic_T(T3, p2c, p1, guess=g4i, groups=groups)
    H3i = ha3 + f_i * hpd3
    w_net_i = (H3i - gas_i.h(T4si, p1)) - (h2s - h1)
    eta_i = w_net_i / (f_i * lhv)
    g_i = g_cb | ~conv_i

    # ---- corrections ------------------------------------------------------------------------
    P_model = eta_gen * (W_t - W_c - pmech)
    g_model = g_t | g_gen | ~(P_model > 0)
    P_ref, HR_ref, ok_ref = _forward_reference(
        ref=ref, T1=T1, p0=p0, p1=p1, p4=p4c, PR=PR, ma=ma, eta_c=eta_c, T3=T3, eta_t=eta_t,
        hf=hf, lhv=lhv, fd=fd, eta_b=eta_b, closs=closs, dp=dp, eta_gen=eta_gen,
        pmech=pmech, T2s=T2s, T4s=T4s, groups=groups,
    )  # fmt: skip
    HR_model = 3600.0 * Q_in / P_model
    P_corr_m = P * P_ref / P_model
    HR_corr_m = HR * HR_ref / HR_model
    bad_m = g_model | ~ok_ref
    _flag(st, bad_m & ~g_model, Reason.CORRECTION_UNAVAILABLE)

    # ---- closure, outputs ---------------------------------------------------------------------
    closure = (P_shaft + closs * Q_in + ma * H4 - ma * h1 - mf * (hf + eta_b * lhv)) / Q_in
    g_clos = ~use_meas | g_hb | g_ma

    def put(name: str, v: Num, bad: NDArray[np.bool_]) -> None:
        dst = out[name]
        np.copyto(dst, v)
        if bad.any():
            np.copyto(dst, np.nan, where=bad)

    put("compressor_pressure_ratio", PR, g_pr)
    put("compressor_isentropic_efficiency", eta_c, g_c)
    put("compressor_polytropic_efficiency", eta_p, g_c)
    put("compressor_specific_work", w_c, g_c)
    put("compressor_isentropic_discharge_temperature", T2s, g_c)
    put("compressor_power", W_c, g_c | g_ma)
    put("air_mass_flow", ma, g_ma)
    put("heat_balance_air_mass_flow", ma_hb, g_hb)
    put("fuel_air_ratio", f, g_f)
    put("exhaust_mass_flow", ma + mf, g_f)
    put("turbine_inlet_temperature", T3, g_cb)
    put("turbine_inlet_pressure", p2 * (1.0 - dp), bp2 | bpar_cb)
    put("turbine_isentropic_efficiency", eta_t, g_t)
    put("turbine_isentropic_exhaust_temperature", T4s, g_t)
    put("turbine_power", W_t, g_t)
    put("shaft_power", P_shaft, bP | bpar_gen)
    put("heat_input", Q_in, bmf | bfuel)
    put("heat_rate_lhv_kj_per_kwh", HR, g_fp)
    put("heat_rate_hhv_kj_per_kwh", HR_hhv, g_fp)
    put("thermal_efficiency", P / Q_in, g_fp)
    put("back_work_ratio", W_c / W_t, g_t)
    put("ideal_brayton_efficiency", eta_B, g_pr)
    put("ideal_cycle_efficiency", eta_i, g_i)
    put("carnot_efficiency", carnot, g_cb)
    put("heat_balance_closure", closure, g_clos)
    put("corrected_power_model", P_corr_m, bad_m)
    put("corrected_heat_rate_lhv_model_kj_per_kwh", HR_corr_m, bad_m)
    if model_selected:
        for k in ("corrected_power", "corrected_heat_rate_lhv_kj_per_kwh"):
            np.copyto(out[k], out[_MODEL_OF[k]])
    if curve:
        out["_T1"][:] = T1
        out["_p0"][:] = p0
        out["_RH"][:] = RH
        out["_curve_bad"][:] = bT1 | bp0 | bRH | g_fp


def _forward_reference(
    *,
    ref: _RefAmbient,
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
    fd: _FuelData,
    eta_b: Num,
    closs: Num,
    dp: Num,
    eta_gen: Num,
    pmech: Num,
    T2s: FloatArray,
    T4s: FloatArray,
    groups: Groups,
) -> tuple[FloatArray, FloatArray, NDArray[np.bool_]]:
    """Generator power and heat rate at reference ambient under the control law.

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
    res = _forward_core(
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


def _forward_core(
    *,
    air: Fluid,
    y_w: Num,
    T1: FloatArray,
    p1: FloatArray,
    p2: FloatArray,
    p4: FloatArray,
    eta_c: Num,
    T3: Num,
    eta_t: Num,
    ma: Num,
    hf: Num,
    lhv: Num,
    fd: _FuelData,
    eta_b: Num,
    closs: Num,
    dp: Num,
    eta_gen: Num,
    pmech: Num,
    temperatures: bool,
    status: StatusArray,
    guesses: tuple[FloatArray, FloatArray] | None = None,
    groups: Groups = None,
) -> dict[str, FloatArray]:
    """Forward cycle: component health and operating point -> sensor values."""
    g2, g4 = (None, None) if guesses is None else guesses
    T3a = np.broadcast_to(np.asarray(T3, dtype=np.float64), np.broadcast(T1, p2, T3).shape)
    T2s, c1 = air.isentropic_T(T1, p1, p2, guess=g2, groups=groups)
    h1 = air.h(T1, p1)
    h2 = h1 + (air.h(T2s, p2) - h1) / eta_c
    p3 = p2 * (1.0 - dp)
    q_net = hf + (eta_b - closs) * lhv
    hr3 = departure(DEPARTURE_H, T3a, p3)
    pd = Fluid([(fd.tab, 1.0)], fd.R)
    ha3 = air.h(T3a) + air.R * T3a * hr3
    hpd3 = pd.h(T3a) + fd.R * T3a * hr3
    f = (ha3 - h2) / (q_net - hpd3)
    f_st = (1.0 - y_w) * _Y_O2_DRY / fd.o2
    bad_f = ~((f > 0) & (f < f_st))
    f = np.where(bad_f, 0.02, f)
    gasf = air.with_part(fd.tab, f, fd.R)
    H3 = ha3 + f * hpd3
    T4s, c2 = gasf.isentropic_T(T3a, p3, p4, guess=g4, groups=groups)
    H4 = H3 - eta_t * (H3 - gasf.h(T4s, p4))
    P_shaft = np.asarray(ma) * (H3 - H4 - (h2 - h1))
    P_gen = np.asarray(eta_gen * (P_shaft - pmech))
    out = {
        "fuel_mass_flow": np.asarray(f * ma),
        "generator_power": P_gen,
        "fuel_air_ratio": f,
        "compressor_discharge_pressure": p2,
        "turbine_inlet_pressure": p3,
    }
    _flag(status, bad_f | ~(P_gen > 0), Reason.ENERGY_BALANCE_INFEASIBLE)
    bad = ~c1 | ~c2
    if temperatures:
        guess = T1 + (T2s - T1) / np.asarray(eta_c)
        T2, c3 = air.T_from_h(h2, p2, guess)
        T4, c4 = gasf.T_from_h(H4, p4, T4s + 20.0)
        out["compressor_discharge_temperature"] = T2
        out["exhaust_temperature"] = T4
        bad |= ~c3 | ~c4
    _flag(status, bad, Reason.NOT_CONVERGED)
    return out


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
    """A unit parameter: a Python float when scalar, else an array of shape (N,)."""
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
    """Reconstruct the actual Brayton cycle of a gas turbine from plant measurements.

    Parameters
    ----------
    ambient_temperature : array_like
        T0 [K].
    ambient_pressure : array_like
        p0 [Pa], absolute.
    ambient_relative_humidity : array_like
        RH [1], fraction 0..1.
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
        Unit parameters (:data:`DEFAULT_PARAMETERS`): [1], [1 of p2], [1], [1 of m_f LHV], [W].
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
    Equations in the module docstring and ``docs/method.md``.  Each result is NaN only where
    its own inputs fail: a missing discharge temperature leaves the heat rate and the
    heat-balance air flow intact.  Warnings (value kept): EFFICIENCY_IMPLAUSIBLE,
    HEAT_RATE_IMPLAUSIBLE, HUMIDITY_SATURATED, CORRECTION_UNAVAILABLE.

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
    fd = _fuel_data(fuel, n)
    hf_src: _FuelHeat | FloatArray
    if fuel.lhv.ndim == 0:
        # one fuel: its sensible enthalpy chunk by chunk (no full-size temporaries); the
        # h_f = 0 shortcut of _fuel_enthalpy still decided over the whole batch
        m["Tf"] = Tf
        zero = fuel_temperature is None or all(
            np.all(_fuel_T_used(Tf[i : i + step]) == mixtures.T_REF) for i in range(0, n, step)
        )
        hf_src = _FuelHeat(fuel, zero)
    else:
        Tf = np.where(np.isnan(Tf), DEFAULT_FUEL_TEMPERATURE, Tf)
        m["Tf"] = Tf
        hf_src = np.broadcast_to(_fuel_enthalpy(fuel, _fuel_T_used(Tf)), (n,))

    method = correction_method
    if method == "auto":
        method = "curve" if corrections is not None else "model"
    curve = corrections is not None  # curve inputs are kept only when there are curves
    names = [k for k in _RESULTS if k not in _CURVE_RESULTS]
    if curve:
        names += ["_T1", "_p0", "_RH", "_curve_bad"]
    out = {k: np.empty(n) for k in names}
    status = np.zeros(n, dtype=np.uint32)
    ref = _reference_ambient()
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
                h_f=hf_src if isinstance(hf_src, _FuelHeat) else hf_src[sl],
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
    out = {k: out[k] for k in _RESULTS}  # the documented order
    # one small lookup table indexed by a uint8 code (same "<U12" strings as np.where, without
    # broadcasting the two string scalars over the batch)
    source = _SOURCE_LABELS.take((~have_ma).view(np.uint8))
    return ComputeOutput(
        values=out,
        status=status,
        labels={"correction_method": method},
        label_arrays={"air_mass_flow_source": source},
    )


def simulate(
    *,
    ambient_temperature: ArrayLike,
    ambient_pressure: ArrayLike,
    ambient_relative_humidity: ArrayLike,
    pressure_ratio: ArrayLike,
    compressor_isentropic_efficiency: ArrayLike,
    turbine_inlet_temperature: ArrayLike,
    turbine_isentropic_efficiency: ArrayLike,
    air_mass_flow: ArrayLike,
    fuel: FuelProperties,
    inlet_pressure_loss: ArrayLike = 0.0,
    exhaust_pressure_loss: ArrayLike = 0.0,
    fuel_temperature: ArrayLike = DEFAULT_FUEL_TEMPERATURE,
    generator_efficiency: ArrayLike = DEFAULT_PARAMETERS["generator_efficiency"],
    combustor_pressure_loss: ArrayLike = DEFAULT_PARAMETERS["combustor_pressure_loss"],
    combustion_efficiency: ArrayLike = DEFAULT_PARAMETERS["combustion_efficiency"],
    casing_heat_loss_fraction: ArrayLike = DEFAULT_PARAMETERS["casing_heat_loss_fraction"],
    mechanical_loss: ArrayLike = DEFAULT_PARAMETERS["mechanical_loss"],
) -> tuple[dict[str, FloatArray], StatusArray]:
    """Forward model: component health and operating point -> the measurements of the contract.

    Parameters
    ----------
    ambient_temperature, ambient_pressure, ambient_relative_humidity : array_like
        T0 [K], p0 [Pa], RH [1].  The compressor inlet temperature is T0.
    pressure_ratio : array_like
        Compressor pressure ratio p2/p1 [1].
    compressor_isentropic_efficiency, turbine_isentropic_efficiency : array_like
        eta_c, eta_t [1].
    turbine_inlet_temperature : array_like
        T3 [K] (heat-balance value).
    air_mass_flow : array_like
        m_a [kg/s].
    fuel : FuelProperties
    inlet_pressure_loss : array_like, optional
        (p0 - p1)/p0 [1] (default 0).
    exhaust_pressure_loss : array_like, optional
        (p4 - p0)/p0 [1] (default 0).
    fuel_temperature : array_like, optional
        T_f [K] (default 298.15 K).
    generator_efficiency, combustor_pressure_loss, combustion_efficiency,
    casing_heat_loss_fraction, mechanical_loss : array_like, optional
        As :func:`reconstruct`.

    Returns
    -------
    measurements : dict of ndarray
        The measurement names of the contract (plus ``air_mass_flow``, ``fuel_temperature``),
        NaN where the status has an error bit.
    status : ndarray of uint32

    Notes
    -----
    The exact inverse of :func:`reconstruct` (same property kernel and balances): T2 from
    ``h2 = h1 + (h2s - h1)/eta_c``; fuel-air ratio in closed form from the combustor balance
    at the given T3; ``h4 = h3 - eta_t (h3 - h4s)``; ``P_gen = eta_gen (W_t - W_c - P_mech)``.
    """
    T0 = np.atleast_1d(np.asarray(ambient_temperature, dtype=np.float64))
    shape = np.broadcast_shapes(
        T0.shape,
        *(np.shape(v) for v in (ambient_pressure, ambient_relative_humidity, pressure_ratio,
                                 compressor_isentropic_efficiency, turbine_inlet_temperature,
                                 turbine_isentropic_efficiency, air_mass_flow, fuel.lhv)),
    )  # fmt: skip
    n = int(np.prod(shape))

    def a(v: ArrayLike) -> FloatArray:
        return np.ascontiguousarray(np.broadcast_to(np.asarray(v, dtype=np.float64), shape))

    T0 = a(T0)
    p0, RH = a(ambient_pressure), a(ambient_relative_humidity)
    status = np.zeros(shape, dtype=np.uint32)
    _check(T0, status, rng=(mixtures.T_MIN, mixtures.T_MAX))
    _check(p0, status)
    _check(RH, status, lo=-1e-300, hi=1.0 + humid_air.RH_TOLERANCE)
    PR, ma = a(pressure_ratio), a(air_mass_flow)
    _check(ma, status)
    _flag(status, ~(PR > 1.0), Reason.PRESSURE_RATIO_INVALID)
    eta_c, eta_t = a(compressor_isentropic_efficiency), a(turbine_isentropic_efficiency)
    _flag(status, ~((eta_c > 0) & (eta_c <= 1) & (eta_t > 0) & (eta_t <= 1)),
          Reason.EFFICIENCY_OUT_OF_RANGE)  # fmt: skip
    T3 = a(turbine_inlet_temperature)
    _check(T3, status, rng=(mixtures.T_MIN, mixtures.T_MAX))
    Tf = a(fuel_temperature)
    fd = _fuel_data(fuel, n)
    p1 = p0 * (1.0 - a(inlet_pressure_loss))
    p4 = p0 * (1.0 + a(exhaust_pressure_loss))
    with np.errstate(all="ignore"):
        y_w = humid_air.water_mass_fraction(T0, p0, RH, status)
        res = _forward_core(
            air=humid_air.humid_air_fluid(y_w), y_w=y_w, T1=T0, p1=p1, p2=PR * p1, p4=p4,
            eta_c=eta_c, T3=T3, eta_t=eta_t, ma=ma, hf=_fuel_enthalpy(fuel, Tf), lhv=fd.lhv, fd=fd,
            eta_b=a(combustion_efficiency), closs=a(casing_heat_loss_fraction),
            dp=a(combustor_pressure_loss), eta_gen=a(generator_efficiency),
            pmech=a(mechanical_loss), temperatures=True, status=status,
        )  # fmt: skip
    meas = {
        "ambient_temperature": T0,
        "ambient_pressure": p0,
        "ambient_relative_humidity": RH,
        "compressor_inlet_temperature": T0.copy(),
        "compressor_inlet_pressure": p1,
        "compressor_discharge_temperature": res["compressor_discharge_temperature"],
        "compressor_discharge_pressure": res["compressor_discharge_pressure"],
        "exhaust_temperature": res["exhaust_temperature"],
        "exhaust_pressure": p4,
        "fuel_mass_flow": res["fuel_mass_flow"],
        "generator_power": res["generator_power"],
        "air_mass_flow": ma,
        "fuel_temperature": Tf,
    }
    err = (status & ~np.uint32(Reason.HUMIDITY_SATURATED)) != 0
    return {k: np.where(err, np.nan, v) for k, v in meas.items()}, status


# ============================================================================================
# The unit type
# ============================================================================================
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

"""Corrections to reference conditions (15 degC, 101.325 kPa, 60 % RH; ISO 2314 / ISO 3977-2).

Invented operating points (a KR-GT1-like 45 MW machine of the Kestrel Ridge Energy Park)
carry no check values; the checks are identities (at reference ambient the correction is the
identity; a machine that follows the control law corrects back to its reference rating) and
facts of the trade marked "common practice".
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from models.correction.gas_turbine import (
    REFERENCE_PRESSURE,
    REFERENCE_RELATIVE_HUMIDITY,
    REFERENCE_TEMPERATURE,
    CorrectionCurve,
    CorrectionTables,
    curve_correction,
    reference_operating_point,
)
from models.properties.fuel import gas_fuel
from models.status import ModelInputError, Reason
from models.units.gas_turbine.reconstruct import reconstruct
from models.units.gas_turbine.simulate import simulate

FUEL = gas_fuel({"CH4": 0.95, "C2H6": 0.03, "C3H8": 0.005, "N2": 0.01, "CO2": 0.005})
HEALTH = {
    "compressor_isentropic_efficiency": 0.87,
    "turbine_inlet_temperature": 1450.0,
    "turbine_isentropic_efficiency": 0.89,
}
LOSSES = {"inlet_pressure_loss": 0.01, "exhaust_pressure_loss": 0.03}
PR_REF, MA_REF = 15.5, 130.0  # invented KR-GT1-like rating point


def _run(T0: np.ndarray, p0: float | np.ndarray, RH: float | np.ndarray, law: bool = True,
         tables: CorrectionTables | None = None) -> tuple[dict[str, np.ndarray], Any]:  # fmt: skip
    """Simulate the machine at ambient T0 under the control law, then reconstruct it."""
    T0 = np.asarray(T0, dtype=float)
    p1 = np.asarray(p0) * (1 - LOSSES["inlet_pressure_loss"])
    p1_ref = REFERENCE_PRESSURE * (1 - LOSSES["inlet_pressure_loss"])
    if law:
        pr, ma = reference_operating_point(
            compressor_inlet_temperature=REFERENCE_TEMPERATURE,
            compressor_inlet_pressure=p1_ref,
            pressure_ratio=PR_REF,
            air_mass_flow=MA_REF,
            reference_inlet_temperature=T0,
            reference_inlet_pressure=p1,
        )
    else:
        pr, ma = np.full(T0.shape, PR_REF), np.full(T0.shape, MA_REF)
    meas, st = simulate(ambient_temperature=T0, ambient_pressure=p0, ambient_relative_humidity=RH,
                        pressure_ratio=pr, air_mass_flow=ma, fuel=FUEL, **HEALTH, **LOSSES)  # fmt: skip
    assert not (st & ~np.uint32(Reason.HUMIDITY_SATURATED)).any()
    m = dict(meas)
    m.pop("air_mass_flow")
    return meas, reconstruct(**m, fuel=FUEL, corrections=tables)


def test_reference_ambient_is_identity() -> None:
    # Identity: at the reference ambient the corrected values equal the measured ones.
    meas, out = _run(np.array([REFERENCE_TEMPERATURE]), REFERENCE_PRESSURE,
                     REFERENCE_RELATIVE_HUMIDITY, law=False)  # fmt: skip
    v = out.values
    assert out.labels["correction_method"] == "model"
    np.testing.assert_allclose(v["corrected_power"], meas["generator_power"], rtol=1e-9)
    np.testing.assert_allclose(v["corrected_heat_rate_lhv_kj_per_kwh"], v["heat_rate_lhv_kj_per_kwh"],
                               rtol=1e-9)  # fmt: skip


def test_machine_following_the_law_corrects_to_its_rating() -> None:
    # Identity: a healthy machine that follows the control law at any ambient corrects back
    # to the power and heat rate it makes at the reference ambient.
    T0 = np.array([253.15, 273.15, 288.15, 303.15, 318.15])
    ref_meas, ref = _run(np.array([REFERENCE_TEMPERATURE]), REFERENCE_PRESSURE, 0.6)
    meas, out = _run(T0, np.array([99.0e3, 101.3e3, 101.325e3, 100.0e3, 97.0e3]),
                     np.array([0.9, 0.6, 0.6, 0.3, 0.15]))  # fmt: skip
    P_ref = float(ref_meas["generator_power"][0])
    HR_ref = float(ref.values["heat_rate_lhv_kj_per_kwh"][0])
    np.testing.assert_allclose(out.values["corrected_power_model"], P_ref, rtol=1e-7)
    np.testing.assert_allclose(out.values["corrected_heat_rate_lhv_model_kj_per_kwh"], HR_ref,
                               rtol=1e-7)  # fmt: skip
    # ...while the measured values spread by tens of percent over this ambient range
    assert np.ptp(meas["generator_power"]) / P_ref > 0.2


def test_hot_day_direction_and_lapse_rate() -> None:
    # Common practice: a heavy-duty gas turbine at base load loses about 0.5-0.8 % of power
    # per kelvin of inlet temperature, and its heat rate rises; the correction must raise a
    # hot-day reading back up and lower its heat rate.
    meas, out = _run(np.array([REFERENCE_TEMPERATURE, 303.15]), REFERENCE_PRESSURE, 0.6)
    P = meas["generator_power"]
    lapse = -(P[1] / P[0] - 1.0) / 15.0
    assert 0.005 <= lapse <= 0.008
    v = out.values
    assert v["heat_rate_lhv_kj_per_kwh"][1] > v["heat_rate_lhv_kj_per_kwh"][0]
    assert v["corrected_power"][1] > P[1]
    assert v["corrected_heat_rate_lhv_kj_per_kwh"][1] < v["heat_rate_lhv_kj_per_kwh"][1]


def test_degraded_machine_stays_degraded_after_correction() -> None:
    # The correction removes ambient effects, not health effects: a compressor 2 points
    # down shows a lower corrected power at every ambient, by about the same amount.
    T0 = np.array([268.15, 288.15, 308.15])
    _, good = _run(T0, REFERENCE_PRESSURE, 0.6)
    saved = HEALTH["compressor_isentropic_efficiency"]
    HEALTH["compressor_isentropic_efficiency"] = saved - 0.02
    try:
        _, bad = _run(T0, REFERENCE_PRESSURE, 0.6)
    finally:
        HEALTH["compressor_isentropic_efficiency"] = saved
    loss = 1.0 - bad.values["corrected_power"] / good.values["corrected_power"]
    assert np.all(loss > 0.01)
    np.testing.assert_allclose(loss, loss[1], atol=1e-6)


# ------------------------------------------------------------------------------------------
# Curve-based
# ------------------------------------------------------------------------------------------
TABLES = CorrectionTables(
    power_vs_inlet_temperature=CorrectionCurve.from_points(
        [253.15, 288.15, 323.15], [1.20, 1.00, 0.78], "alpha_T"
    ),
    power_vs_ambient_pressure=CorrectionCurve.from_points([90e3, 110e3], [0.8882, 1.0856]),
    heat_rate_vs_inlet_temperature=CorrectionCurve.from_points(
        [253.15, 288.15, 323.15], [0.97, 1.00, 1.04]
    ),
)


def test_curve_correction_interpolates_and_refuses_to_extrapolate() -> None:
    T1 = np.array([288.15, 305.65, 330.0, np.nan])
    P = np.array([45e6, 40e6, 35e6, 40e6])
    HR = np.array([10000.0, 10200.0, 10500.0, 10000.0])
    Pc, HRc, st = curve_correction(TABLES, compressor_inlet_temperature=T1,
                                   ambient_pressure=101325.0, ambient_relative_humidity=0.6,
                                   power=P, heat_rate=HR)  # fmt: skip
    alpha_p = np.interp(101325.0, [90e3, 110e3], [0.8882, 1.0856])
    assert Pc[0] == pytest.approx(45e6 / alpha_p)
    assert Pc[1] == pytest.approx(40e6 / (0.89 * alpha_p))  # halfway 288.15-323.15
    assert HRc[1] == pytest.approx(10200.0 / 1.02)
    assert np.isnan(Pc[2:]).all() and np.isnan(HRc[2:]).all()
    assert st[2] & Reason.CORRECTION_UNAVAILABLE and st[3] & Reason.CORRECTION_UNAVAILABLE
    assert not st[:2].any()
    Pn, _, stn = curve_correction(None, compressor_inlet_temperature=T1,
                                  ambient_pressure=101325.0, ambient_relative_humidity=0.6,
                                  power=P, heat_rate=HR)  # fmt: skip
    assert np.isnan(Pn).all() and np.all(stn & Reason.CORRECTION_UNAVAILABLE)


def test_curve_method_label_and_values_in_reconstruction() -> None:
    meas, out = _run(np.array([288.15, 303.15, 340.0]), REFERENCE_PRESSURE, 0.6,
                     tables=TABLES)  # fmt: skip
    v = out.values
    assert out.labels["correction_method"] == "curve"
    np.testing.assert_array_equal(v["corrected_power"], v["corrected_power_curve"])
    assert np.isfinite(v["corrected_power_model"]).all()
    alpha_p = np.interp(REFERENCE_PRESSURE, [90e3, 110e3], [0.8882, 1.0856])
    alpha_T = np.interp(303.15, [253.15, 288.15, 323.15], [1.20, 1.00, 0.78])
    assert v["corrected_power_curve"][1] == pytest.approx(
        meas["generator_power"][1] / (alpha_T * alpha_p)
    )
    # 340 K is outside the unit's table: no extrapolation, a warning bit, model still there
    assert np.isnan(v["corrected_power"][2]) and out.status[2] & Reason.CORRECTION_UNAVAILABLE


def test_curve_validation() -> None:
    with pytest.raises(ModelInputError):
        CorrectionCurve.from_points([300.0, 290.0], [1.0, 1.1])
    with pytest.raises(ModelInputError):
        CorrectionCurve.from_points([300.0, 310.0], [1.0, -1.0])
    with pytest.raises(ModelInputError):
        CorrectionCurve.from_points([300.0], [1.0])

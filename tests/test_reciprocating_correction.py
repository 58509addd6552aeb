"""ISO 3046-1 correction of engine power and fuel consumption (models.correction.iso3046).

Check values: the ISO 3046-1:2002 standard reference conditions (clause 5; clause number from
memory), and the standard's worked examples of the power adjustment (a naturally aspirated
Diesel engine at a hot, humid site; a turbocharged, charge-air cooled engine at 4000 m with
substitute reference conditions).  The example inputs are as reproduced in a public worked
example collection (FOSSEE Scilab textbook companion, engine testing chapter); the expected
results are recomputed by hand here from the clause's equations with the examples' own
rounded saturation pressures, so the tolerance covers our IAPWS values (9.59 / 3.17 kPa where
the examples use 9.6 / 3.2 kPa).  Spark-ignition factor: ISO 1585:1992 (from memory).
"""

from __future__ import annotations

import numpy as np
import pytest

from models.correction.iso3046 import (
    ISO3046_EXPONENTS,
    STANDARD_REFERENCE,
    Iso3046Exponents,
    Iso3046Reference,
    fuel_consumption_adjustment_factor,
    indicated_power_ratio,
    iso3046_correction,
    power_adjustment_factor,
    spark_ignition_correction_factor,
)
from models.status import Reason

NA = ISO3046_EXPONENTS["ci_naturally_aspirated"]
TC = ISO3046_EXPONENTS["ci_turbocharged"]
CAC = ISO3046_EXPONENTS["ci_turbocharged_charge_air_cooled"]
G_PER_KWH = 3.6e9


def _hand(
    p: float,
    T: float,
    rh: float,
    ps: float,
    tc: float,
    e: Iso3046Exponents,
    eta_m: float,
    ref: tuple[float, float, float, float] = (100.0, 298.0, 0.3, 3.2),
    tcr: float = 298.0,
) -> tuple[float, float, float]:
    """k, alpha, beta by hand, pressures in kPa as the examples write them."""
    pr, Tr, rhr, psr = ref
    k = ((p - e.a * rh * ps) / (pr - e.a * rhr * psr)) ** e.m * (Tr / T) ** e.n * (tcr / tc) ** e.s
    alpha = k - 0.7 * (1 - k) * (1 / eta_m - 1)
    return k, alpha, k / alpha


def test_standard_reference_conditions() -> None:
    # ISO 3046-1:2002, clause 5 (from memory of the number): 100 kPa, 298 K, 30 %, 298 K.
    assert STANDARD_REFERENCE.pressure == 100.0e3
    assert STANDARD_REFERENCE.temperature == 298.0
    assert STANDARD_REFERENCE.relative_humidity == 0.30
    assert STANDARD_REFERENCE.charge_air_coolant_temperature == 298.0
    # at the reference itself nothing is adjusted, for every engine type
    for e in ISO3046_EXPONENTS.values():
        k, st = indicated_power_ratio(100.0e3, 298.0, 0.30, 298.0, e)
        a, _ = power_adjustment_factor(k, 0.85)
        assert st == 0 and float(k) == pytest.approx(1.0, abs=1e-14)
        assert float(a) == pytest.approx(1.0, abs=1e-14)


def test_worked_example_naturally_aspirated_hot_humid_site() -> None:
    # ISO 3046-1 worked example: P_r 500 kW, b_r 220 g/kWh, eta_m 0.85; site 87 kPa, 45 degC,
    # 80 % RH; exponents a = 1, m = 1, n = 0.75, s = 0 (power limited by excess air).
    k_h, a_h, b_h = _hand(87.0, 318.0, 0.8, 9.6, 298.0, NA, 0.85)
    assert (round(k_h, 4), round(a_h, 4), round(b_h, 4)) == (0.7628, 0.7335, 1.0399)
    k, _ = indicated_power_ratio(87.0e3, 318.0, 0.8, 298.0, NA)
    a, _ = power_adjustment_factor(k, 0.85)
    assert float(k) == pytest.approx(k_h, rel=1e-3)
    assert float(a) == pytest.approx(a_h, rel=1.5e-3)
    assert float(fuel_consumption_adjustment_factor(k, a)) == pytest.approx(b_h, rel=1e-3)
    # site power and bsfc of the example: 366.8 kW, 228.8 g/kWh (hand values); corrected back
    c = iso3046_correction(
        a_h * 500.0e3,
        b_h * 220.0 / G_PER_KWH,
        87.0e3,
        318.0,
        0.8,
        exponents=NA,
        mechanical_efficiency=0.85,
    )
    assert c.status == 0
    assert float(c.corrected_power) == pytest.approx(500.0e3, rel=1.5e-3)
    assert float(c.corrected_brake_specific_fuel_consumption) * G_PER_KWH == pytest.approx(
        220.0, rel=1e-3
    )


def test_worked_example_altitude_with_substitute_reference() -> None:
    # ISO 3046-1 worked example: turbocharged, charge-air cooled, P_r 1000 kW, eta_m 0.90, at
    # 4000 m (61.5 kPa, 323 K, coolant 310 K).  Substitute reference: T_ra 313 K and
    # p_ra = 100 kPa x 2 / 2.36 (boost ratio at reference over the maximum) = 84.7 kPa.
    sub = Iso3046Reference(pressure=84.7e3, temperature=313.0)
    k_h, a_h, _ = _hand(61.5, 323.0, 0.3, 0.0, 310.0, CAC, 0.90, ref=(84.7, 313.0, 0.3, 0.0))
    k, st = indicated_power_ratio(61.5e3, 323.0, 0.3, 310.0, CAC, reference=sub)
    a, _ = power_adjustment_factor(k, 0.90)
    assert st == 0
    assert float(k) == pytest.approx(k_h, rel=1e-12)  # a = 0: no humidity term to round
    assert round(float(a) * 1000.0) == round(a_h * 1000.0)  # site power in whole kW
    # without the substitute conditions the method derates far more (the example's point)
    k0, _ = indicated_power_ratio(61.5e3, 323.0, 0.3, 310.0, CAC)
    a0, _ = power_adjustment_factor(k0, 0.90)
    _k0_h, a0_h, _ = _hand(61.5, 323.0, 0.3, 0.0, 310.0, CAC, 0.90)
    assert float(a0) == pytest.approx(a0_h, rel=1e-12)
    assert float(a0) < float(a) - 0.1


def test_site_to_reference_to_test_bed() -> None:
    # ISO 3046-1 worked example (turbocharged, charge-air cooled, eta_m 0.85): 640 kW at site
    # (70 kPa, 330 K, coolant 300 K) to standard reference, then to the test bed (100 kPa,
    # 300 K, coolant 280 K).  Site -> reference -> site is the identity.
    _k_r, a_r, _ = _hand(70.0, 330.0, 0.3, 0.0, 300.0, CAC, 0.85)
    c = iso3046_correction(
        640.0e3,
        1.0e-8,
        70.0e3,
        330.0,
        0.3,
        charge_air_coolant_temperature=300.0,
        exponents=CAC,
        mechanical_efficiency=0.85,
    )
    assert float(c.corrected_power) == pytest.approx(640.0e3 / a_r, rel=1e-12)
    assert float(c.corrected_power * c.power_adjustment_factor) == pytest.approx(640.0e3)
    _k_y, a_y, _ = _hand(100.0, 300.0, 0.3, 0.0, 280.0, CAC, 0.85)
    ky, _ = indicated_power_ratio(100.0e3, 300.0, 0.3, 280.0, CAC)
    ay, _ = power_adjustment_factor(ky, 0.85)
    assert float(c.corrected_power * ay) == pytest.approx(640.0e3 / a_r * a_y, rel=1e-12)


def test_adjustment_directions_and_identities() -> None:
    # eta_m = 1: no friction, alpha = k; hotter or thinner air: less power; beta >= 1 when
    # derating (specific fuel consumption rises as friction takes a larger share).
    k, _ = indicated_power_ratio(95.0e3, 308.0, 0.6, 303.0, CAC)
    a1, _ = power_adjustment_factor(k, 1.0)
    assert float(a1) == pytest.approx(float(k))
    T = np.array([288.0, 298.0, 308.0, 318.0])
    for e in ISO3046_EXPONENTS.values():
        kk, _ = indicated_power_ratio(100.0e3, T, 0.3, 298.0, e)
        assert np.all(np.diff(kk) < 0)
    kp, _ = indicated_power_ratio(np.array([80e3, 90e3, 100e3]), 298.0, 0.3, 298.0, TC)
    assert np.all(np.diff(kp) > 0)
    a, _ = power_adjustment_factor(kp, 0.85)
    beta = fuel_consumption_adjustment_factor(kp, a)
    assert beta[0] > 1.0 and beta[2] == pytest.approx(1.0)


def test_validity_flags() -> None:
    # brayscope's validity band (module docstring): 60-110 kPa, 243-333 K, coolant 273-333 K.
    k, st = indicated_power_ratio(
        [50.0e3, 100.0e3, 100.0e3, 100.0e3, np.nan, 100e3],
        [298.0, 340.0, 298.0, 298.0, 298.0, 298.0],
        [0.3, 0.3, 1.2, 0.3, 0.3, 0.3],
        [298.0, 298.0, 298.0, 350.0, 298.0, 298.0],
        CAC,
    )
    assert st[0] == Reason.CORRECTION_UNAVAILABLE and st[1] == Reason.CORRECTION_UNAVAILABLE
    assert st[2] == Reason.INPUT_NONPHYSICAL and st[3] == Reason.CORRECTION_UNAVAILABLE
    assert st[4] == Reason.INPUT_MISSING and st[5] == 0
    assert np.isnan(k[:5]).all() and not np.isnan(k[5])
    # the coolant temperature does not matter when s = 0
    k, st = indicated_power_ratio(100.0e3, 298.0, 0.3, np.nan, TC)
    assert st == 0 and float(k) == pytest.approx(1.0)
    a, st = power_adjustment_factor([0.1, 0.9], [0.85, 1.2])
    assert np.isnan(a).all()
    assert st[0] == Reason.CORRECTION_UNAVAILABLE and st[1] == Reason.EFFICIENCY_OUT_OF_RANGE
    c = iso3046_correction(
        [300.0e3, -1.0], 2.2e-8 / 100, 90e3, 310.0, 0.5, exponents=NA, mechanical_efficiency=0.85
    )
    assert c.status[0] == 0 and c.status[1] & Reason.INPUT_NONPHYSICAL
    assert np.isnan(c.corrected_power[1])


def test_spark_ignition_factor() -> None:
    # ISO 1585:1992 formula (from memory): alpha_a = (99 / p_d)^1.2 (T / 298)^0.6; worked
    # example 640 kW at 98 kPa, 303 K, 80 % RH (p_s 4.2 kPa rounded in the example).
    hand = (99.0 / (98.0 - 0.8 * 4.2)) ** 1.2 * (303.0 / 298.0) ** 0.6
    a, st = spark_ignition_correction_factor(98.0e3, 303.0, 0.8)
    assert st == 0 and float(a) == pytest.approx(hand, rel=5e-4)
    assert round(640 * float(a)) == 682  # kW at reference
    a, st = spark_ignition_correction_factor(100.0e3, 298.0, 0.3)
    assert float(a) == pytest.approx(1.0, abs=1e-3)  # 100 kPa at 30 % RH is 99.05 kPa dry
    a, st = spark_ignition_correction_factor([85.0e3, 100.0e3], [298.0, 280.0], 0.3)
    assert (st == Reason.CORRECTION_UNAVAILABLE).all() and np.isnan(a).all()

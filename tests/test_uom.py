"""Unit conversion at the boundary (daemon.uom) against published definitions.

Sources named beside each value:
* NIST SP 811 (2008), Guide for the Use of the International System of Units, Appendix B.8/B.9
  (conversion factors, printed to 7 significant digits or fewer) and section B.9
  (temperature: T/K = t/°C + 273.15, T/K = (t/°F + 459.67)/1.8).  The B.8 factors below are
  quoted from memory; each pressure factor is also checked against its exact definition.
* International yard and pound agreement (1959): 1 in = 0.0254 m, 1 lb = 0.45359237 kg (exact).
* 3rd CGPM (1901): standard acceleration of gravity g_n = 9.80665 m/s² (exact).
* SI Brochure (BIPM, 9th ed. 2019): bar = 1e5 Pa, tonne = 1000 kg, hour = 3600 s (exact).
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from daemon.uom import (
    Converter,
    IncompatibleUnitError,
    UnknownUnitError,
    compile_converter,
    get_registry,
    make_registry,
    parse_uom,
)

INCH = 0.0254  # m, exact (1959 agreement)
POUND = 0.45359237  # kg, exact (1959 agreement)
G_N = 9.80665  # m/s², exact (3rd CGPM 1901)
LBF = POUND * G_N  # N, pound-force = lb · g_n (NIST SP 811 B.8: 4.448 222 N)


@pytest.mark.parametrize(
    ("uom", "target", "value", "expected", "rtol"),
    [
        # NIST SP 811 B.8: pound-force per square inch (psi) = 6.894 757 E+03 Pa
        ("psi", "Pa", 1.0, 6.894757e3, 1e-7),
        # same, from the exact definition lbf / in²
        ("psi", "Pa", 1.0, LBF / INCH**2, 1e-12),
        # NIST SP 811 B.8: inch of water (39.2 °F) = 2.490 82 E+02 Pa
        ("inH2O_39F", "Pa", 1.0, 2.49082e2, 2e-6),
        ("inH2O_4C", "Pa", 1.0, 2.49082e2, 2e-6),
        # NIST SP 811 B.8: inch of water (60 °F) = 2.4884 E+02 Pa
        ("inH2O_60F", "Pa", 1.0, 2.4884e2, 2e-5),
        # conventional inch of water: 0.0254 m × 1000 kg/m³ × g_n (definition; 249.088 91 Pa)
        ("inH2O", "Pa", 1.0, INCH * 1000.0 * G_N, 1e-12),
        # NIST SP 811 B.8: millimeter of mercury, conventional = 1.333 224 E+02 Pa
        ("mmHg", "Pa", 1.0, 1.333224e2, 1e-6),
        # SI Brochure: bar = 1e5 Pa, so mbar = 100 Pa and 1 hPa = 1 mbar
        ("bar", "Pa", 14.2, 14.2e5, 1e-15),
        ("mbar", "Pa", 1013.25, 101325.0, 1e-15),
        ("hPa", "Pa", 1013.25, 101325.0, 1e-15),
        ("kPa", "Pa", 101.325, 101325.0, 1e-15),
        ("MPa", "Pa", 1.5, 1.5e6, 1e-15),
        # mass flow: 1959 pound, SI tonne and hour
        ("lb/s", "kg/s", 1.0, POUND, 1e-15),
        ("kg/h", "kg/s", 9800.0, 9800.0 / 3600.0, 1e-15),
        ("t/h", "kg/s", 3.6, 1.0, 1e-15),
        # power: SI prefixes
        ("MW", "W", 45.0, 45.0e6, 1e-15),
        ("kW", "W", 12000.0, 12.0e6, 1e-15),
        ("W", "W", 7.0, 7.0, 0.0),
        # ratios: per cent is 0.01 (SI Brochure 9th ed., 5.4.7)
        ("%RH", "1", 60.0, 0.60, 1e-15),
        ("percent", "1", 60.0, 0.60, 1e-15),
        ("%", "1", 100.0, 1.0, 1e-15),
        ("fraction", "1", 0.6, 0.6, 0.0),
    ],
)
def test_linear_conversions_match_published_values(
    uom: str, target: str, value: float, expected: float, rtol: float
) -> None:
    c = compile_converter(uom, target)
    assert c(value) == pytest.approx(expected, rel=rtol, abs=0.0)
    assert c.offset == 0.0


@pytest.mark.parametrize(
    ("uom", "t", "kelvin"),
    [
        # NIST SP 811 B.9: T/K = t/°C + 273.15 (exact)
        ("degC", 0.0, 273.15),
        ("degC", 15.0, 288.15),
        ("degC", -40.0, 233.15),
        # NIST SP 811 B.9: T/K = (t/°F + 459.67)/1.8 (exact)
        ("degF", 32.0, 273.15),
        ("degF", 212.0, 373.15),
        ("degF", -459.67, 0.0),
        ("degF", -40.0, 233.15),  # −40 °F = −40 °C (follows from the two definitions)
        ("degF", 59.0, 288.15),  # ISO reference 15 °C
        # NIST SP 811 B.9: T/K = (t/°R)/1.8
        ("degR", 518.67, 288.15),
        ("K", 300.0, 300.0),
    ],
)
def test_temperature_conversions_exact(uom: str, t: float, kelvin: float) -> None:
    c = compile_converter(uom, "K")
    assert c(t) == pytest.approx(kelvin, abs=1e-9)


def test_fahrenheit_converter_is_the_exact_affine_map() -> None:
    # T = (t + 459.67) / 1.8  →  scale 1/1.8, offset 459.67/1.8 (NIST SP 811 B.9)
    c = compile_converter("degF", "K")
    assert c.scale == pytest.approx(1 / 1.8, rel=1e-15)
    assert c.offset == pytest.approx(459.67 / 1.8, rel=1e-15)


@pytest.mark.parametrize(
    ("uom", "value", "baro", "expected"),
    [
        # absolute = gauge + barometric (definition of gauge pressure)
        ("barg", 14.0, 101325.0, 14.0e5 + 101325.0),
        ("kPag", 2390.0, 100900.0, 2390.0e3 + 100900.0),
        ("mbarg", 25.0, 99500.0, 2500.0 + 99500.0),
        ("psig", 200.0, 101325.0, 200.0 * LBF / INCH**2 + 101325.0),
    ],
)
def test_gauge_pressure_adds_the_barometric_reference(
    uom: str, value: float, baro: float, expected: float
) -> None:
    c = compile_converter(uom, "Pa")
    assert c.gauge
    assert c(value, baro) == pytest.approx(expected, rel=1e-12)
    with pytest.raises(ValueError, match="barometric reference"):
        c(value)


def test_absolute_suffix_spellings_are_not_gauge() -> None:
    for uom, base in (("bara", "bar"), ("psia", "psi"), ("kPaa", "kPa"), ("mbara", "mbar")):
        a, b = compile_converter(uom, "Pa"), compile_converter(base, "Pa")
        assert not a.gauge
        assert a.scale == b.scale


def test_converter_is_a_multiply_add_on_arrays() -> None:
    c = compile_converter("degC", "K")
    x = np.linspace(-40.0, 600.0, 17)
    np.testing.assert_array_equal(c(x), x * c.scale + c.offset)
    g = compile_converter("barg", "Pa")
    baro = np.full_like(x, 101000.0)
    np.testing.assert_array_equal(g(x, baro), x * g.scale + g.offset + baro)


@given(
    uom=st.sampled_from(["degC", "degF", "kPa", "psi", "kg/h", "MW", "%RH", "inH2O"]),
    x=st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
)
def test_inverse_round_trip(uom: str, x: float) -> None:
    target = {"degC": "K", "degF": "K", "kg/h": "kg/s", "MW": "W", "%RH": "1"}.get(uom, "Pa")
    c = compile_converter(uom, target)
    assert c.inverse(c(x)) == pytest.approx(x, rel=1e-9, abs=1e-6)


@pytest.mark.parametrize("uom", ["degK2", "celsius_x", "millibarz", "kg/", "psigg", "%RHX"])
def test_unknown_units_are_rejected_with_a_fix(uom: str) -> None:
    with pytest.raises(UnknownUnitError) as info:
        compile_converter(uom, "K")
    assert info.value.uom == uom
    assert "unknown unit" in info.value.message
    assert info.value.fix.startswith("use one of ")


def test_missing_unit_is_rejected() -> None:
    with pytest.raises(UnknownUnitError, match="missing unit of measure"):
        compile_converter("  ", "Pa")


def test_case_typo_suggests_the_right_spelling() -> None:
    with pytest.raises(UnknownUnitError) as info:
        compile_converter("degc", "K")
    assert info.value.fix.startswith("use one of degC")
    assert "did you mean 'degC'" in info.value.fix


@pytest.mark.parametrize(
    ("uom", "target"),
    [("bar", "K"), ("degC", "Pa"), ("kg/h", "W"), ("MW", "kg/s"), ("%RH", "K"), ("psig", "K")],
)
def test_wrong_kind_of_unit_is_rejected(uom: str, target: str) -> None:
    with pytest.raises(IncompatibleUnitError) as info:
        compile_converter(uom, target)
    assert "this measurement is a" in info.value.message


def test_parse_uom_flags_gauge_only_for_gauge_spellings() -> None:
    assert parse_uom("barg").gauge and parse_uom("psig").gauge and parse_uom("kPag").gauge
    assert not parse_uom("bar").gauge and not parse_uom("bara").gauge
    assert parse_uom(" %RH ").pint_expr == "percent"


def test_registry_is_cached_and_injectable() -> None:
    assert get_registry() is get_registry()
    own = make_registry()
    assert own is not get_registry()
    c = compile_converter("degF", "K", registry=own)
    assert isinstance(c, Converter) and c(32.0) == pytest.approx(273.15, abs=1e-9)


def test_importing_the_config_does_not_build_a_registry() -> None:
    code = "import daemon.config, daemon.uom; print(daemon.uom.get_registry.cache_info().currsize)"
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout
    assert out.strip() == "0"

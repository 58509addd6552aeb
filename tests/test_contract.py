"""The calc input contract (daemon.contract): parsing, rejection classes, messages, defaults.

Check values are facts, not outputs of our own code:

* RFC 8259 ("The JavaScript Object Notation (JSON) Data Interchange Format"), section 6:
  "Numeric values that cannot be represented in the grammar below (such as Infinity and NaN)
  are not permitted."  Python's ``json`` module accepts them unless told not to (Python
  library reference, ``json`` module, "Infinite and NaN Number Values").
* Thermodynamic temperature is positive (SI Brochure, 9th ed., 2019, section 2.3.1: the kelvin
  scale starts at absolute zero); absolute pressure is positive (common practice).
* Relative humidity is a ratio of vapour partial pressure to saturation pressure, 0..1 (WMO
  Guide to Instruments and Methods of Observation, WMO-No. 8, annex 4.B; common practice).
* A real (adiabatic, irreversible) compressor discharges hotter than its inlet and at a higher
  pressure (second law; common practice).
* The contract's measurement names and parameter defaults are the project's published
  contract (docs/calc.md, docs/glossary.md).
"""

from __future__ import annotations

import copy
import json
import math
from typing import Any

import pytest

from daemon.calc import example_path
from daemon.contract import (
    CORRECTION_CURVES,
    FieldError,
    InputFormatError,
    RecordRef,
    ValidRecord,
    contract_for,
    correction_tables,
    format_quantity,
    parse_document,
    validate_record,
)
from models.correction.gas_turbine import CorrectionTables
from models.status import ModelInputError
from models.units.registry import builtin_unit_types

UNIT_TYPES = builtin_unit_types()
GT = UNIT_TYPES["gas_turbine"]

#: The measurement keys of the fixed calc contract (docs/calc.md; the brief others script to).
CONTRACT_REQUIRED = {
    "ambient_temperature",
    "ambient_pressure",
    "ambient_relative_humidity",
    "compressor_inlet_temperature",
    "compressor_inlet_pressure",
    "compressor_discharge_temperature",
    "compressor_discharge_pressure",
    "exhaust_temperature",
    "exhaust_pressure",
    "fuel_mass_flow",
    "generator_power",
}
CONTRACT_OPTIONAL = {"air_mass_flow", "fuel_temperature"}
#: Parameter defaults published in docs/glossary.md and docs/calc.md.
CONTRACT_DEFAULTS = {
    "generator_efficiency": 0.985,
    "combustor_pressure_loss": 0.04,
    "combustion_efficiency": 0.995,
    "casing_heat_loss_fraction": 0.005,
}


def example() -> dict[str, Any]:
    text = example_path("kr-gt1-snapshot.json").read_text(encoding="utf-8")
    value: dict[str, Any] = json.loads(text)
    return value


def check(value: Any) -> ValidRecord | list[FieldError]:
    return validate_record(RecordRef(1), value, UNIT_TYPES)


def errors_of(value: Any) -> list[str]:
    result = check(value)
    assert isinstance(result, list), "record was accepted but should be rejected"
    return [str(e) for e in result]


# ------------------------------------------------------------------------------------------
# The contract matches the unit type and the published key list
# ------------------------------------------------------------------------------------------


def test_contract_keys_are_the_published_ones() -> None:
    c = contract_for(GT)
    fields = c.measurements.model_fields
    required = {n for n, f in fields.items() if f.is_required()}
    assert required == CONTRACT_REQUIRED
    assert set(fields) - required == CONTRACT_OPTIONAL
    assert set(c.record.model_fields) == {
        "id",
        "ts",
        "unit_type",
        "measurements",
        "fuel",
        "parameters",
        "corrections",
    }


def test_parameter_defaults_come_from_the_unit_type_and_match_the_docs() -> None:
    rec = example()
    del rec["parameters"]
    valid = check(rec)
    assert isinstance(valid, ValidRecord)
    for spec in GT.parameters:
        assert valid.parameters[spec.name] == spec.default
    for name, published in CONTRACT_DEFAULTS.items():
        assert valid.parameters[name] == pytest.approx(published, rel=1e-12)


def test_given_parameter_overrides_default() -> None:
    rec = example()
    rec["parameters"] = {"combustion_efficiency": 0.99}
    valid = check(rec)
    assert isinstance(valid, ValidRecord)
    assert valid.parameters["combustion_efficiency"] == 0.99
    assert valid.parameters["generator_efficiency"] == CONTRACT_DEFAULTS["generator_efficiency"]


def test_the_shipped_example_is_valid() -> None:
    valid = check(example())
    assert isinstance(valid, ValidRecord)
    assert valid.id == "KR-GT1 2026-06-14T10:00Z"
    assert valid.measurements["air_mass_flow"] is None  # optional, absent


def test_optional_measurement_null_is_absent_required_null_is_an_error() -> None:
    rec = example()
    rec["measurements"]["air_mass_flow"] = None
    assert isinstance(check(rec), ValidRecord)
    rec["measurements"]["exhaust_temperature"] = None
    (msg,) = errors_of(rec)
    assert msg == "measurements.exhaust_temperature: must be a number (got null)"


# ------------------------------------------------------------------------------------------
# Parsing the document
# ------------------------------------------------------------------------------------------


def test_parse_object_list_and_jsonl() -> None:
    one = json.dumps(example())
    assert parse_document(one).shape == "object"
    doc = parse_document(f"[{one}, {one}]")
    assert doc.shape == "list"
    assert [r.ref.index for r in doc.records] == [1, 2]
    doc = parse_document(f"{one}\n\n{one}\n")
    assert doc.shape == "jsonl"
    assert [(r.ref.index, r.ref.line) for r in doc.records] == [(1, 1), (2, 3)]


def test_jsonl_bad_line_rejects_only_that_record() -> None:
    one = json.dumps(example())
    doc = parse_document(f"{one}\n{one[:-5]}\n{one}\n")
    assert doc.shape == "jsonl"
    assert [r.error is None for r in doc.records] == [True, False, True]
    assert str(doc.records[1].error).startswith("not valid JSON")


@pytest.mark.parametrize("text", ["", "   \n", "42", '"text"', "{not json", "null"])
def test_unreadable_documents_raise(text: str) -> None:
    with pytest.raises(InputFormatError):
        parse_document(text)


# RFC 8259 section 6: Infinity and NaN are not JSON numbers.
@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity"])
def test_nonfinite_literal_is_rejected_with_its_path(literal: str) -> None:
    text = json.dumps(example()).replace(
        '"exhaust_temperature": 820.0', f'"exhaust_temperature": {literal}'
    )
    assert literal in text
    (raw,) = parse_document(text).records
    (msg,) = errors_of(raw.value)
    assert msg.startswith("measurements.exhaust_temperature: NaN/Infinity is not JSON")
    # the Python json default would have accepted it silently
    assert math.isnan(json.loads(text)["measurements"]["exhaust_temperature"]) or math.isinf(
        json.loads(text)["measurements"]["exhaust_temperature"]
    )


def test_nonfinite_anywhere_is_named_beside_the_other_problems() -> None:
    text = (
        json.dumps(example())
        .replace('"ts": "2026-06-14T10:00:00Z"', '"ts": Infinity')
        .replace('"CH4": 0.931', '"CH4": NaN')
        .replace('"ambient_relative_humidity": 0.62', '"ambient_relative_humidity": 62')
    )
    (raw,) = parse_document(text).records
    msgs = errors_of(raw.value)
    assert [m.split(":")[0] for m in msgs] == [
        "ts",
        "measurements.ambient_relative_humidity",
        "fuel.composition.CH4",
    ]
    assert "NaN/Infinity is not JSON" in msgs[0]
    assert "NaN/Infinity is not JSON" in msgs[2]


def test_python_nan_is_rejected_too() -> None:
    """Records built in Python (the daemon) reach the same check without JSON parsing."""
    rec = example()
    rec["measurements"]["fuel_mass_flow"] = float("nan")
    (msg,) = errors_of(rec)
    assert msg.startswith("measurements.fuel_mass_flow: must be a finite number")


# ------------------------------------------------------------------------------------------
# Rejection classes and their messages
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("where", "typo", "suggestion"),
    [
        ((), "unit_typ", "unit_type"),
        (("measurements",), "compresor_discharge_pressure", "compressor_discharge_pressure"),
        (("parameters",), "generator_eficiency", "generator_efficiency"),
        (("fuel",), "sulphur_mass_fraction", None),
    ],
)
def test_unknown_keys_are_rejected_with_a_suggestion(
    where: tuple[str, ...], typo: str, suggestion: str | None
) -> None:
    rec = example()
    target = rec
    for k in where:
        target = target[k]
    target[typo] = 1.0
    msgs = errors_of(rec)
    path = ".".join(where)
    expected = f"{path}: unknown key {typo!r}" if path else f"unknown key {typo!r}"
    assert any(m.startswith(expected) for m in msgs), msgs
    if suggestion:
        assert any(f"(did you mean {suggestion!r}?)" in m for m in msgs), msgs


def test_liquid_fuel_typo_is_suggested() -> None:
    rec = example()
    rec["fuel"] = {
        "lower_heating_value": 42.8e6,
        "carbon_mass_fraction": 0.865,
        "hydrogen_mass_fraction": 0.133,
        "sulphur_mass_fraction": 0.002,
    }
    (msg,) = errors_of(rec)
    assert msg == (
        "fuel: unknown key 'sulphur_mass_fraction' (did you mean 'sulfur_mass_fraction'?)"
    )


@pytest.mark.parametrize(
    ("value", "shown"),
    [("44.4e6", "a string '44.4e6'"), (True, "a boolean True"), ([44.4e6], "a list")],
)
def test_wrong_types_are_rejected(value: Any, shown: str) -> None:
    rec = example()
    rec["measurements"]["generator_power"] = value
    (msg,) = errors_of(rec)
    assert msg == f"measurements.generator_power: must be a number (got {shown})"


def test_measurements_must_be_an_object() -> None:
    rec = example()
    rec["measurements"] = [1, 2, 3]
    (msg,) = errors_of(rec)
    assert msg == "measurements: must be an object (got a list)"


def test_record_must_be_an_object() -> None:
    assert errors_of([1, 2]) == ["must be a JSON object (got a list)"]


def test_missing_measurement_names_its_unit() -> None:
    rec = example()
    del rec["measurements"]["compressor_inlet_pressure"]
    (msg,) = errors_of(rec)
    assert msg == "measurements.compressor_inlet_pressure: required field is missing [Pa]"


ABSOLUTE = [s.name for s in GT.measurements if s.unit in ("K", "Pa")]


@pytest.mark.parametrize("name", ABSOLUTE)
@pytest.mark.parametrize("bad", [0.0, -1.0])
def test_absolute_temperature_and_pressure_must_be_positive(name: str, bad: float) -> None:
    # SI Brochure 2019, 2.3.1: thermodynamic temperature >= 0 K; absolute pressure > 0.
    rec = example()
    if name not in rec["measurements"]:
        rec["measurements"][name] = 300.0
    rec["measurements"][name] = bad
    msgs = errors_of(rec)
    unit = next(s.unit for s in GT.measurements if s.name == name)
    assert (
        f"measurements.{name}: must be > 0 {unit} (absolute) (got {format_quantity(bad, unit)})"
        in msgs
    )


@pytest.mark.parametrize(("name", "unit"), [("fuel_mass_flow", "kg/s"), ("generator_power", "W")])
def test_zero_fuel_flow_or_power_is_rejected(name: str, unit: str) -> None:
    # common practice: a heat rate needs fuel flow > 0 and power > 0 (HR = 3600 m_f LHV / P)
    rec = example()
    rec["measurements"][name] = 0.0
    (msg,) = errors_of(rec)
    assert msg == f"measurements.{name}: must be > 0 {unit} (got 0 {unit})"


def test_zero_loss_parameter_is_accepted() -> None:
    rec = example()
    rec["parameters"]["mechanical_loss"] = 0.0
    rec["parameters"]["casing_heat_loss_fraction"] = 0.0
    assert isinstance(check(rec), ValidRecord)


@pytest.mark.parametrize("rh", [-0.01, 1.01, 62.0])
def test_relative_humidity_outside_0_1_is_rejected(rh: float) -> None:
    # WMO-No. 8: relative humidity is a ratio 0..1 (a percentage is the usual mistake).
    rec = example()
    rec["measurements"]["ambient_relative_humidity"] = rh
    (msg,) = errors_of(rec)
    assert msg.startswith("measurements.ambient_relative_humidity: must be within 0..1")
    assert f"(got {format_quantity(rh)})" in msg


@pytest.mark.parametrize("rh", [0.0, 1.0])
def test_relative_humidity_limits_are_accepted(rh: float) -> None:
    rec = example()
    rec["measurements"]["ambient_relative_humidity"] = rh
    assert isinstance(check(rec), ValidRecord)


def test_celsius_for_kelvin_is_caught_by_the_range() -> None:
    rec = example()
    rec["measurements"]["compressor_inlet_temperature"] = 17.9  # °C given for K
    (msg,) = errors_of(rec)
    assert msg.startswith("measurements.compressor_inlet_temperature: must be")
    assert "(got 17.9 K)" in msg


def test_discharge_pressure_not_above_inlet_is_rejected() -> None:
    rec = example()
    rec["measurements"]["compressor_inlet_pressure"] = 101325.0
    rec["measurements"]["compressor_discharge_pressure"] = 101000.0
    (msg,) = errors_of(rec)
    assert msg == (
        "measurements.compressor_discharge_pressure: must be > compressor_inlet_pressure "
        "(got 101000 Pa ≤ 101325 Pa)"
    )


@pytest.mark.parametrize("t2", [291.05, 290.0])
def test_discharge_not_hotter_than_inlet_is_rejected(t2: float) -> None:
    rec = example()
    rec["measurements"]["compressor_discharge_temperature"] = t2
    (msg,) = errors_of(rec)
    assert msg == (
        "measurements.compressor_discharge_temperature: must be > compressor_inlet_temperature "
        f"(got {format_quantity(t2, 'K')} ≤ 291.05 K)"
    )


def test_all_problems_of_a_record_are_reported_at_once() -> None:
    rec = example()
    rec["measurements"]["ambient_pressure"] = -5.0
    rec["measurements"]["ambient_relative_humidity"] = 1.6
    rec["parameters"]["generator_efficiency"] = "high"
    rec["extra"] = 1
    msgs = errors_of(rec)
    assert len(msgs) == 4
    assert {m.split(":")[0] for m in msgs} == {
        "measurements.ambient_pressure",
        "measurements.ambient_relative_humidity",
        "parameters.generator_efficiency",
        "unknown key 'extra'; allowed",
    }


def test_unknown_unit_type_is_rejected() -> None:
    rec = example()
    rec["unit_type"] = "gas_turbin"
    (msg,) = errors_of(rec)
    assert msg.startswith("unit_type: unknown unit type 'gas_turbin' (did you mean 'gas_turbine'?)")


# ------------------------------------------------------------------------------------------
# Fuel and corrections
# ------------------------------------------------------------------------------------------


def test_fuel_needs_composition_or_heating_value() -> None:
    rec = example()
    rec["fuel"] = {"compositon": {"CH4": 1.0}}
    (msg,) = errors_of(rec)
    assert msg.startswith("fuel: must be an object with either 'composition'")
    assert "'compositon' (did you mean 'composition'?)" in msg


def test_unknown_fuel_component_is_suggested() -> None:
    rec = example()
    rec["fuel"] = {"composition": {"CH4": 0.97, "C3H9": 0.03}}
    (msg,) = errors_of(rec)
    assert msg.startswith("fuel.composition.C3H9: unknown species 'C3H9' (did you mean 'C3H8'?)")


def test_mole_fraction_outside_0_1_is_rejected() -> None:
    rec = example()
    rec["fuel"] = {"composition": {"CH4": 1.2}}
    (msg,) = errors_of(rec)
    assert msg == "fuel.composition.CH4: must be within 0..1 (got 1.2)"


def test_composition_not_summing_to_one_is_refused_by_the_fuel_model() -> None:
    rec = example()
    rec["fuel"] = {"composition": {"CH4": 0.9}}
    valid = check(rec)
    assert isinstance(valid, ValidRecord)  # well-formed; the chemistry check is the model's
    with pytest.raises(ModelInputError):
        valid.fuel.to_fuel()


def test_liquid_fuel_is_accepted_and_builds() -> None:
    rec = example()
    rec["fuel"] = {
        "lower_heating_value": 42.8e6,
        "carbon_mass_fraction": 0.865,
        "hydrogen_mass_fraction": 0.133,
    }
    valid = check(rec)
    assert isinstance(valid, ValidRecord)
    fuel = valid.fuel.to_fuel()
    assert float(fuel.lhv) == 42.8e6
    assert fuel.kind == "liquid"


def test_corrections_shape_is_that_of_correction_tables() -> None:
    rec = example()
    rec["corrections"] = {
        "power_vs_inlet_temperature": {"x": [258.15, 288.15, 318.15], "factor": [1.16, 1.0, 0.78]}
    }
    valid = check(rec)
    assert isinstance(valid, ValidRecord)
    assert valid.corrections is not None
    tables = correction_tables(valid.corrections)
    assert isinstance(tables, CorrectionTables)
    assert tables.power_vs_inlet_temperature is not None
    assert tables.power_vs_inlet_temperature.factor == (1.16, 1.0, 0.78)
    assert tables.heat_rate_vs_inlet_temperature is None
    assert set(CORRECTION_CURVES) == {
        "power_vs_inlet_temperature",
        "power_vs_ambient_pressure",
        "power_vs_relative_humidity",
        "heat_rate_vs_inlet_temperature",
        "heat_rate_vs_ambient_pressure",
        "heat_rate_vs_relative_humidity",
    }


def test_unknown_correction_curve_is_suggested() -> None:
    rec = example()
    rec["corrections"] = {"power_vs_inlet_temp": {"x": [1.0, 2.0], "factor": [1.0, 1.0]}}
    (msg,) = errors_of(rec)
    assert msg == (
        "corrections: unknown key 'power_vs_inlet_temp' "
        "(did you mean 'power_vs_inlet_temperature'?)"
    )


def test_decreasing_curve_is_refused_with_its_name() -> None:
    rec = example()
    rec["corrections"] = {
        "power_vs_ambient_pressure": {"x": [101325.0, 90000.0], "factor": [1, 0.9]}
    }
    valid = check(rec)
    assert isinstance(valid, ValidRecord)
    assert valid.corrections is not None
    with pytest.raises(ModelInputError, match=r"corrections\.power_vs_ambient_pressure\.x"):
        correction_tables(valid.corrections)


def test_validation_does_not_mutate_input() -> None:
    rec = example()
    before = copy.deepcopy(rec)
    check(rec)
    assert rec == before

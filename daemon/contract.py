"""The input contract of brayscope calculations: what one record looks like, and its validation.

A record is one snapshot of one unit::

    {
      "id": "KR-GT1 2026-06-01T12:00Z",          optional, echoed (string or integer)
      "ts": "2026-06-01T12:00:00Z",              optional, echoed (string or number)
      "unit_type": "gas_turbine",                optional unit type, default "gas_turbine"
      "measurements": {...},                     SI units, absolute pressures
      "fuel": {"composition": {"CH4": 0.93, ...}}            gas fuel, mole fractions
           or {"lower_heating_value": 42.8e6,                liquid fuel, J/kg and
               "carbon_mass_fraction": 0.86, "hydrogen_mass_fraction": 0.135, ...}  mass fractions
      "parameters": {...},                       optional, each with a default
      "corrections": {...}                       optional correction tables
    }

The measurement and parameter names, units, ranges and defaults are not listed here: they are
taken from the unit type (:class:`models.units.base.UnitType`), so the contract and the model can
never disagree.  :func:`contract_for` builds the pydantic models for one unit type.

What is rejected (each with the record and the field path in the message):

* NaN and Infinity (not JSON; Python's ``json`` accepts them unless told not to),
* unknown keys at any level (with a "did you mean" suggestion), wrong types,
* absolute temperatures or pressures ≤ 0, values outside the unit type's stated range
  (relative humidity outside 0..1, fractions outside 0..1, ...),
* a compressor discharge not hotter than the inlet, a discharge pressure not above the inlet.

Error classes::

    FieldError          one problem: a dotted field path and a message (a dataclass, not raised)
    InputFormatError    (ValueError) the document as a whole is not JSON / JSON Lines
"""

from __future__ import annotations

import dataclasses
import difflib
import json
import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Annotated, Any, Literal, cast

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    ValidationError,
    create_model,
    model_validator,
)
from pydantic_core import PydanticCustomError

from models.correction.gas_turbine import CorrectionCurve, CorrectionTables
from models.properties.fuel import GAS_COMPONENTS
from models.units.base import FieldSpec, UnitType

__all__ = [
    "CORRECTION_CURVES",
    "DEFAULT_UNIT_TYPE",
    "Contract",
    "CorrectionCurveSpec",
    "CorrectionsSpec",
    "FieldError",
    "GasFuelSpec",
    "InputFormatError",
    "LiquidFuelSpec",
    "NonFinite",
    "ParsedDocument",
    "RawRecord",
    "RecordRef",
    "ValidRecord",
    "contract_for",
    "correction_tables",
    "echo_id",
    "format_quantity",
    "parse_document",
    "renamed_keys",
    "validate_record",
]

#: Unit type of a record without a ``"unit_type"`` key.
DEFAULT_UNIT_TYPE = "gas_turbine"

#: Cross-field order checks: (field, must be greater than field), applied when a unit type has
#: both measurements.
ORDER_CHECKS: tuple[tuple[str, str], ...] = (
    ("compressor_discharge_temperature", "compressor_inlet_temperature"),
    ("compressor_discharge_pressure", "compressor_inlet_pressure"),
)

#: Units whose quantities are absolute and therefore strictly positive.
POSITIVE_UNITS = frozenset({"K", "Pa"})
#: Units of measurements that must be strictly positive when their range starts at 0.
POSITIVE_MEASURED_UNITS = frozenset({"kg/s", "W"})

_STRICT: ConfigDict = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False, frozen=True)


# --------------------------------------------------------------------------------------------
# Messages
# --------------------------------------------------------------------------------------------


def format_quantity(value: float, unit: str = "") -> str:
    """Format a number for a message: integers plainly, others to 6 significant digits.

    >>> format_quantity(101325.0, "Pa"), format_quantity(0.87123456, "1"), format_quantity(2e7)
    ('101325 Pa', '0.871235', '2e+07')
    """
    if math.isfinite(value) and value == round(value) and abs(value) < 1e7:
        text = str(int(value))
    else:
        text = f"{value:.6g}"
    return f"{text} {unit}" if unit and unit != "1" else text


@dataclass(frozen=True)
class FieldError:
    """One problem with a record: ``path`` is dotted (``measurements.exhaust_temperature``),
    empty for the record as a whole."""

    path: str
    message: str

    def __str__(self) -> str:
        return f"{self.path}: {self.message}" if self.path else self.message


@dataclass(frozen=True)
class RecordRef:
    """Where a record came from: its 1-based position, its JSON Lines line and its id."""

    index: int
    line: int | None = None
    id: str | int | None = None

    def __str__(self) -> str:
        extra = []
        if self.line is not None and self.line != self.index:
            extra.append(f"line {self.line}")
        if self.id is not None:
            extra.append(f"id {json.dumps(self.id)}")
        return f"record {self.index}" + (f" ({', '.join(extra)})" if extra else "")


def _suggest(word: str, choices: Iterable[str]) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _custom(kind: str, message: str) -> PydanticCustomError:
    return PydanticCustomError(kind, "{text}", {"text": message})


# --------------------------------------------------------------------------------------------
# Reading the document: one object, a JSON list or JSON Lines
# --------------------------------------------------------------------------------------------


class InputFormatError(ValueError):
    """The input as a whole is neither a JSON document nor JSON Lines."""


@dataclass(frozen=True)
class NonFinite:
    """Stand-in for a ``NaN``/``Infinity``/``-Infinity`` literal met while parsing, so the
    record (and the field) holding it can be named and rejected while the others go on."""

    literal: str


def _parse_constant(literal: str) -> NonFinite:
    return NonFinite(literal)


def _loads(text: str) -> Any:
    return json.loads(text, parse_constant=_parse_constant)


@dataclass(frozen=True)
class RawRecord:
    """One record as read: its reference, the parsed value, or why it could not be parsed."""

    ref: RecordRef
    value: Any = None
    error: FieldError | None = None


@dataclass(frozen=True)
class ParsedDocument:
    """``shape`` is ``"object"`` (one record), ``"list"`` (a JSON array) or ``"jsonl"``."""

    shape: Literal["object", "list", "jsonl"]
    records: tuple[RawRecord, ...]


def parse_document(text: str) -> ParsedDocument:
    """Split an input document into raw records.

    A JSON object is one record, a JSON array a list of records; anything else that is not one
    JSON value is read as JSON Lines (one object per non-blank line), where a line that does
    not parse is an error of that record only.  NaN/Infinity literals are kept as
    :class:`NonFinite` markers so that validation can name them.

    Raises
    ------
    InputFormatError
        Empty input, a top-level value that is neither an object nor an array, or text of which
        no line is JSON.
    """
    stripped = text.strip()
    if not stripped:
        raise InputFormatError("the input is empty (expected a JSON object, a list or JSON Lines)")
    try:
        whole = _loads(stripped)
    except json.JSONDecodeError as exc:
        whole_error: json.JSONDecodeError | None = exc
    else:
        whole_error = None
        if isinstance(whole, dict):
            return ParsedDocument("object", (RawRecord(RecordRef(1), whole),))
        if isinstance(whole, list):
            return ParsedDocument(
                "list", tuple(RawRecord(RecordRef(i + 1), v) for i, v in enumerate(whole))
            )
        raise InputFormatError(
            f"the input is a JSON {type(whole).__name__}, expected an object, a list of "
            "objects or JSON Lines"
        )
    records: list[RawRecord] = []
    parsed_any = False
    for line_no, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        ref = RecordRef(len(records) + 1, line=line_no)
        try:
            value = _loads(line)
        except json.JSONDecodeError as exc:
            records.append(
                RawRecord(
                    ref, error=FieldError("", f"not valid JSON: {exc.msg} (column {exc.colno})")
                )
            )
        else:
            parsed_any = True
            records.append(RawRecord(ref, value))
    if not parsed_any or len(records) < 2:
        assert whole_error is not None
        raise InputFormatError(
            f"not valid JSON: {whole_error.msg} (line {whole_error.lineno}, "
            f"column {whole_error.colno})"
        )
    return ParsedDocument("jsonl", tuple(records))


# --------------------------------------------------------------------------------------------
# Fuel specs (independent of the unit type)
# --------------------------------------------------------------------------------------------


def _check_species(name: str) -> str:
    if name not in GAS_COMPONENTS:
        raise _custom(
            "unknown_species",
            f"unknown species {name!r}{_suggest(name, GAS_COMPONENTS)}; "
            f"known: {', '.join(GAS_COMPONENTS)}",
        )
    return name


def _fraction(v: float) -> float:
    if not 0.0 <= v <= 1.0:
        raise _custom("out_of_range", f"must be within 0..1 (got {format_quantity(v)})")
    return v


def _positive(unit: str) -> Callable[[float], float]:
    def check(v: float) -> float:
        if not v > 0.0:
            raise _custom("out_of_range", f"must be > 0 {unit} (got {format_quantity(v, unit)})")
        return v

    return check


Fraction = Annotated[float, AfterValidator(_fraction)]
SpeciesName = Annotated[str, AfterValidator(_check_species)]


class GasFuelSpec(BaseModel):
    """A gaseous fuel by composition: mole fractions [1] per component of
    :data:`models.properties.fuel.GAS_COMPONENTS` (summing to 1 within the fuel model's
    tolerance)."""

    model_config = _STRICT

    composition: dict[SpeciesName, Fraction] = Field(min_length=1)

    def to_fuel(self) -> Any:
        """Build the model's fuel object (raises :class:`models.status.ModelInputError`)."""
        from models.properties.fuel import gas_fuel

        return gas_fuel(self.composition)


class LiquidFuelSpec(BaseModel):
    """A liquid fuel by lower heating value [J/kg] and ultimate analysis (mass fractions [1])."""

    model_config = _STRICT

    lower_heating_value: Annotated[float, AfterValidator(_positive("J/kg"))]
    carbon_mass_fraction: Fraction
    hydrogen_mass_fraction: Fraction
    sulfur_mass_fraction: Fraction = 0.0
    higher_heating_value: Annotated[float, AfterValidator(_positive("J/kg"))] | None = None
    oxygen_mass_fraction: Fraction | None = None
    liquid_cp: Annotated[float, AfterValidator(_positive("J/(kg K)"))] | None = None

    def to_fuel(self) -> Any:
        """Build the model's fuel object (raises :class:`models.status.ModelInputError`)."""
        from models.properties.fuel import liquid_fuel

        optional = {
            k: v
            for k, v in (
                ("oxygen_mass_fraction", self.oxygen_mass_fraction),
                ("liquid_cp", self.liquid_cp),
            )
            if v is not None
        }
        return liquid_fuel(
            lower_heating_value=self.lower_heating_value,
            carbon_mass_fraction=self.carbon_mass_fraction,
            hydrogen_mass_fraction=self.hydrogen_mass_fraction,
            sulfur_mass_fraction=self.sulfur_mass_fraction,
            higher_heating_value=self.higher_heating_value,
            **optional,
        )


_FUEL_TAGS = {"gas": GasFuelSpec, "liquid": LiquidFuelSpec}


def _fuel_kind(value: Any) -> str | None:
    if isinstance(value, BaseModel):
        return "gas" if isinstance(value, GasFuelSpec) else "liquid"
    if isinstance(value, dict):
        if "composition" in value:
            return "gas"
        if "lower_heating_value" in value:
            return "liquid"
    return None


FuelSpec = Annotated[
    Annotated[GasFuelSpec, Tag("gas")] | Annotated[LiquidFuelSpec, Tag("liquid")],
    Discriminator(
        _fuel_kind,
        custom_error_type="fuel_kind",
        custom_error_message="fuel_kind",  # replaced by a full message in _convert_error
    ),
]


# --------------------------------------------------------------------------------------------
# Correction tables (the shape of models.correction.gas_turbine.CorrectionTables)
# --------------------------------------------------------------------------------------------


class CorrectionCurveSpec(BaseModel):
    """One correction curve: ``factor`` [1] versus ``x`` (SI: K, Pa or RH fraction), at least
    two points, ``x`` strictly increasing, factors > 0 (checked by
    :class:`models.correction.gas_turbine.CorrectionCurve`)."""

    model_config = _STRICT

    x: list[float] = Field(min_length=2)
    factor: list[float] = Field(min_length=2)


#: Curve names accepted under ``"corrections"``: the fields of CorrectionTables.
CORRECTION_CURVES: tuple[str, ...] = tuple(f.name for f in dataclasses.fields(CorrectionTables))

CorrectionsSpec: type[BaseModel] = create_model(
    "CorrectionsSpec",
    __config__=_STRICT,
    __doc__="Unit-supplied correction curves by name (each optional; absent = factor 1).",
    **dict.fromkeys(CORRECTION_CURVES, (CorrectionCurveSpec | None, None)),  # type: ignore[call-overload]
)


def correction_tables(spec: BaseModel) -> CorrectionTables:
    """Build :class:`models.correction.gas_turbine.CorrectionTables` from a validated
    ``CorrectionsSpec`` (raises :class:`models.status.ModelInputError` naming
    ``corrections.<curve>.x|factor``)."""
    curves = {}
    for name in CORRECTION_CURVES:
        c = getattr(spec, name)
        if c is not None:
            curves[name] = CorrectionCurve.from_points(c.x, c.factor, name=f"corrections.{name}")
    return CorrectionTables(**curves)


# --------------------------------------------------------------------------------------------
# Models built from a unit type's field specs
# --------------------------------------------------------------------------------------------


def _spec_validator(spec: FieldSpec, *, measurement: bool) -> Callable[[float], float]:
    # Absolute temperatures and pressures are always > 0; measured flows and power must be > 0
    # too (a heat rate needs both), while a parameter such as a loss may well be 0.
    positive = spec.unit in POSITIVE_UNITS or (
        measurement and spec.unit in POSITIVE_MEASURED_UNITS and spec.low >= 0.0
    )

    def check(v: float) -> float:
        q = format_quantity
        if positive and not v > 0.0:
            absolute = " (absolute)" if spec.unit in POSITIVE_UNITS else ""
            raise _custom(
                "out_of_range",
                f"must be > 0 {spec.unit}{absolute} (got {q(v, spec.unit)})",
            )
        if v < spec.low or v > spec.high:
            if math.isfinite(spec.low) and math.isfinite(spec.high):
                rng = f"within {q(spec.low)}..{q(spec.high, spec.unit)}"
            elif math.isfinite(spec.low):
                rng = f">= {q(spec.low, spec.unit)}"
            else:
                rng = f"<= {q(spec.high, spec.unit)}"
            raise _custom("out_of_range", f"must be {rng} (got {q(v, spec.unit)})")
        return v

    return check


def _field(spec: FieldSpec, *, measurement: bool) -> tuple[Any, Any]:
    annotated = Annotated[float, AfterValidator(_spec_validator(spec, measurement=measurement))]
    desc = f"{spec.description} [{spec.unit}]"
    if spec.required:
        return (annotated, Field(description=desc))
    return (annotated | None, Field(default=spec.default, description=desc))


def _order_validator(
    specs: Mapping[str, FieldSpec],
) -> Callable[[BaseModel], BaseModel]:
    checks = [(a, b) for a, b in ORDER_CHECKS if a in specs and b in specs]

    def check(model: BaseModel) -> BaseModel:
        for hi, lo in checks:
            v_hi, v_lo = getattr(model, hi), getattr(model, lo)
            if v_hi is not None and v_lo is not None and not v_hi > v_lo:
                unit = specs[hi].unit
                raise PydanticCustomError(
                    "order",
                    "{text}",
                    {
                        "text": f"must be > {lo} (got {format_quantity(v_hi, unit)} ≤ "
                        f"{format_quantity(v_lo, unit)})",
                        "field": hi,
                    },
                )
        return model

    return check


@dataclass(frozen=True)
class Contract:
    """The pydantic models of one unit type's record, and the field specs they came from."""

    unit_type: UnitType
    measurements: type[BaseModel]
    parameters: type[BaseModel]
    record: type[BaseModel]
    known_keys: Mapping[tuple[str, ...], tuple[str, ...]] = field(repr=False)

    def measurement_spec(self, name: str) -> FieldSpec | None:
        """The field spec of a measurement, or ``None``."""
        return next((s for s in self.unit_type.measurements if s.name == name), None)


def contract_for(unit_type: UnitType) -> Contract:
    """Build the record models of ``unit_type`` from its measurement and parameter specs.

    The result is cached per unit-type object; the models reject unknown keys, NaN/Infinity,
    strings for numbers, and values outside the specs' ranges.
    """
    cached = _CONTRACTS.get(id(unit_type))
    if cached is None or cached.unit_type is not unit_type:
        cached = _build_contract(unit_type)
        _CONTRACTS[id(unit_type)] = cached
    return cached


#: Built contracts by ``id`` of their unit type (unit types need not be hashable; the entry
#: keeps its unit type alive, so an id is never reused while cached).
_CONTRACTS: dict[int, Contract] = {}


def _build_contract(unit_type: UnitType) -> Contract:
    specs = {s.name: s for s in unit_type.measurements}
    tag = unit_type.name.title().replace("_", "")
    meas_fields: dict[str, Any] = {
        s.name: _field(s, measurement=True) for s in unit_type.measurements
    }
    measurements = create_model(
        f"{tag}Measurements",
        __config__=_STRICT,
        __validators__=cast(
            Any, {"_order": model_validator(mode="after")(_order_validator(specs))}
        ),
        **meas_fields,
    )
    param_fields: dict[str, Any] = {
        s.name: _field(s, measurement=False) for s in unit_type.parameters
    }
    parameters = create_model(f"{tag}Parameters", __config__=_STRICT, **param_fields)
    record = create_model(
        f"{tag}Record",
        __config__=_STRICT,
        id=(str | int | None, None),
        ts=(str | float | None, None),
        unit_type=(str, unit_type.name),
        measurements=(measurements, ...),
        fuel=(FuelSpec, ...),
        parameters=(parameters, Field(default_factory=parameters)),
        corrections=cast(Any, (CorrectionsSpec | None, None)),
    )
    known: dict[tuple[str, ...], tuple[str, ...]] = {
        (): tuple(record.model_fields),
        ("measurements",): tuple(measurements.model_fields),
        ("parameters",): tuple(parameters.model_fields),
        ("fuel", "gas"): tuple(GasFuelSpec.model_fields),
        ("fuel", "liquid"): tuple(LiquidFuelSpec.model_fields),
        ("corrections",): CORRECTION_CURVES,
        **{("corrections", c): ("x", "factor") for c in CORRECTION_CURVES},
    }
    return Contract(unit_type, measurements, parameters, record, known)


# --------------------------------------------------------------------------------------------
# Validating one record
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ValidRecord:
    """A record that passed validation.  ``measurements`` holds every measurement of the unit
    type (``None`` for an absent optional one); ``parameters`` has the defaults filled in."""

    ref: RecordRef
    unit_type: UnitType
    id: str | int | None
    ts: str | float | None
    measurements: Mapping[str, float | None]
    fuel: GasFuelSpec | LiquidFuelSpec
    parameters: Mapping[str, float | None]
    corrections: BaseModel | None
    deprecations: tuple[str, ...] = ()


def _type_name(value: Any) -> str:
    return {
        dict: "an object",
        list: "a list",
        str: "a string",
        bool: "a boolean",
        type(None): "null",
    }.get(type(value), f"a {type(value).__name__}")


_NONFINITE_MESSAGE = (
    "NaN/Infinity is not JSON and is not accepted; omit an unknown optional value or give null"
)
#: Top-level keys whose type is a union: pydantic adds the member's name to the error location.
_UNION_KEYS = {"id": "a string or an integer", "ts": "a string or a number"}


def _convert_error(err: Mapping[str, Any], contract: Contract) -> FieldError:
    raw_loc = tuple(str(p) for p in err["loc"])
    kind = err["type"]
    ctx = err.get("ctx") or {}
    if kind == "order" and "field" in ctx:
        raw_loc = (*raw_loc, ctx["field"])
    # Drop the union tags and pydantic's "[key]" marker from the displayed path.
    loc = [
        p
        for i, p in enumerate(raw_loc)
        if p != "[key]" and not (i == 1 and raw_loc[0] == "fuel" and p in _FUEL_TAGS)
    ]
    if loc and loc[0] in _UNION_KEYS:
        loc = loc[:1]
    path = ".".join(loc)
    value = err.get("input")
    if isinstance(value, NonFinite):
        return FieldError(path, _NONFINITE_MESSAGE)
    if len(loc) == 1 and loc[0] in _UNION_KEYS and kind != "extra_forbidden":
        return FieldError(path, f"must be {_UNION_KEYS[loc[0]]} (got {_type_name(value)})")
    if kind == "extra_forbidden":
        known = contract.known_keys.get(raw_loc[:-1], ())
        path = ".".join(loc[:-1])
        hint = _suggest(raw_loc[-1], known)
        msg = f"unknown key {raw_loc[-1]!r}{hint}"
        if known and not hint:
            msg += f"; allowed: {', '.join(known)}"
        return FieldError(path, msg)
    if kind == "missing":
        spec = contract.measurement_spec(loc[-1]) if loc[:1] == ["measurements"] else None
        unit = f" [{spec.unit}]" if spec else ""
        return FieldError(path, f"required field is missing{unit}")
    if kind == "fuel_kind":
        msg = (
            "must be an object with either 'composition' (gas fuel: mole fractions) or "
            "'lower_heating_value' with 'carbon_mass_fraction' and 'hydrogen_mass_fraction' "
            "(liquid fuel)"
        )
        if isinstance(value, dict):
            allowed = ("composition", *LiquidFuelSpec.model_fields)
            hints = [f"{k!r}{_suggest(k, allowed)}" for k in value if k not in allowed]
            if hints:
                msg += f"; unknown key {', '.join(hints)}"
        else:
            msg += f" (got {_type_name(value)})"
        return FieldError(path, msg)
    if kind in ("float_type", "float_parsing", "int_type", "int_from_float"):
        shown = _type_name(value)
        if isinstance(value, str | bool):
            shown += f" {value!r}"
        return FieldError(path, f"must be a number (got {shown})")
    if kind == "finite_number":
        return FieldError(path, f"must be a finite number (got {value!r})")
    if kind in ("model_type", "model_attributes_type", "dict_type"):
        return FieldError(path, f"must be an object (got {_type_name(value)})")
    if kind == "string_type":
        return FieldError(path, f"must be a string (got {_type_name(value)})")
    if "text" in ctx:
        return FieldError(path, str(ctx["text"]))
    return FieldError(path, str(err["msg"]))


def validate_record(
    ref: RecordRef,
    value: Any,
    unit_types: Mapping[str, UnitType],
    default_unit: str = DEFAULT_UNIT_TYPE,
) -> ValidRecord | list[FieldError]:
    """Validate one parsed record against the contract of its unit type.

    Parameters
    ----------
    ref : RecordRef
        Where the record came from (used in messages by the caller).
    value : object
        The parsed JSON value (NaN/Infinity as :class:`NonFinite`).
    unit_types : Mapping[str, UnitType]
        Known unit types by name (injected; usually
        :func:`models.units.registry.builtin_unit_types`).
    default_unit : str
        Unit type of a record without a ``"unit_type"`` key.

    Returns
    -------
    ValidRecord or list of FieldError
        The validated record, or every problem found (never an empty list).
    """
    if not isinstance(value, dict):
        return [FieldError("", f"must be a JSON object (got {_type_name(value)})")]
    value, deprecations = renamed_keys(value)
    unit_name = value.get("unit_type", default_unit)
    if isinstance(unit_name, NonFinite):
        return [FieldError("unit_type", _NONFINITE_MESSAGE)]
    if not isinstance(unit_name, str) or unit_name not in unit_types:
        shown = unit_name if isinstance(unit_name, str) else _type_name(unit_name)
        hint = _suggest(shown, unit_types) if isinstance(unit_name, str) else ""
        return [
            FieldError(
                "unit_type",
                f"unknown unit type {shown!r}{hint}; known: {', '.join(unit_types)}",
            )
        ]
    contract = contract_for(unit_types[unit_name])
    try:
        rec = contract.record.model_validate(value)
    except ValidationError as exc:
        # dict.fromkeys: a union reports one error per member; keep each message once, in order
        found = (_convert_error(e, contract) for e in exc.errors(include_url=False))
        return list(dict.fromkeys(found))
    meas = rec.measurements.model_dump()  # type: ignore[attr-defined]
    params = rec.parameters.model_dump()  # type: ignore[attr-defined]
    return ValidRecord(
        ref=RecordRef(ref.index, ref.line, rec.id),  # type: ignore[attr-defined]
        unit_type=contract.unit_type,
        id=rec.id,  # type: ignore[attr-defined]
        ts=rec.ts,  # type: ignore[attr-defined]
        measurements=meas,
        fuel=rec.fuel,  # type: ignore[attr-defined]
        parameters=params,
        corrections=rec.corrections,  # type: ignore[attr-defined]
        deprecations=deprecations,
    )


def renamed_keys(value: dict[str, Any]) -> tuple[dict[str, Any], tuple[str, ...]]:
    """A record with its deprecated top-level keys renamed (``timestamp`` → ``ts``), and a
    message for each (accepted for one release; see :mod:`daemon.renames`)."""
    from daemon.renames import RENAMED_CALC_KEYS, deprecation_message

    notes: list[str] = []
    for old, new in RENAMED_CALC_KEYS.items():
        if old in value and new not in value:
            value = {(new if k == old else k): v for k, v in value.items()}
            notes.append(deprecation_message("record key", old, new))
    return value, tuple(notes)


def echo_id(value: Any) -> tuple[str | int | None, str | float | None]:
    """The ``id`` and ``ts`` of a raw record, when of an echoable type (for records that
    fail validation, so their output still carries them)."""
    if not isinstance(value, dict):
        return None, None
    value, _ = renamed_keys(value)
    rid = value.get("id")
    ts = value.get("ts")
    rid = rid if isinstance(rid, str | int) and not isinstance(rid, bool) else None
    ts = ts if isinstance(ts, str | int | float) and not isinstance(ts, bool) else None
    return rid, ts

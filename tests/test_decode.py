"""Payload decoders: every payload form, every timestamp form, every rejection class, fuzzed.

Check values and their sources:

* Celsius ↔ kelvin offset 273.15 K and 1 bar = 1e5 Pa, 1 mbar = 100 Pa: exact by definition
  (BIPM, The International System of Units, 9th edition, 2019, sections 2.3.1 and table 8).
* Unix times 1 000 000 000 s = 2001-09-09T01:46:40Z and 1 234 567 890 s = 2009-02-13T23:31:30Z
  (widely published milestones of the Unix clock; from memory, and each follows from the
  POSIX definition of seconds since the epoch, IEEE Std 1003.1 "Seconds Since the Epoch").
* OPC DA quality byte: 0xC0 = 192 good, 0x40 = 64 uncertain, 0x00 bad (OPC Foundation, Data
  Access 2.05a/3.0 quality flags; from memory).  The thresholds ≥192 / 64..191 / <64 follow.
* Python's json accepts NaN/Infinity unless parse_constant rejects them (Python docs,
  ``json`` module, "Infinite and NaN Number Values").
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from daemon.feeds.decode import (
    META_KEYS,
    Batch,
    Decoder,
    DecoderConfigError,
    DecoderLimits,
    SequenceTracker,
    TagRoute,
    parse_quality,
    parse_timestamp,
)
from daemon.types import QUARANTINE_REASONS, Quarantined
from daemon.uom import Converter, compile_converter

T0 = 1_234_567_890.0  # 2009-02-13T23:31:30Z (see module docstring)


@dataclass
class Tag:
    """A tag with a real compiled converter (same shape as daemon.config.TagConfig)."""

    topic: str
    key: str
    measurement: str
    uom: str
    low: float
    high: float
    si: str
    max_age_s: float = 30.0
    baro_pa: float | None = None
    converter: Converter = field(init=False)

    def __post_init__(self) -> None:
        self.converter = compile_converter(self.uom, self.si)

    @property
    def baro_reference(self) -> str | None:
        if not self.converter.gauge or self.baro_pa is not None:
            return None
        return "ambient_pressure"

    def to_si(self, value: float, baro_pa: float | None = None) -> float:
        return self.converter(value, self.baro_pa if baro_pa is None else baro_pa)


UNIT = "KR-GT1"
TAGS = [
    Tag("kestrel/gt1/TT-AMB", "", "ambient_temperature", "degC", -40.0, 55.0, "K"),
    Tag("kestrel/gt1/PT-AMB", "", "ambient_pressure", "mbar", 800.0, 1100.0, "Pa"),
    Tag("kestrel/gt1/FQ-GAS", "", "fuel_mass_flow", "kg/s", -1.0, 5.0, "kg/s"),
    Tag("kestrel/gt1/unit", "TT-CD", "compressor_discharge_temperature", "degC", 0, 600, "K"),
    Tag("kestrel/gt1/unit", "PT-CD", "compressor_discharge_pressure", "barg", 0.0, 30.0, "Pa"),
    Tag("kestrel/gt1/unit", "PT-BARO", "ambient_pressure_backup", "kPa", 80.0, 110.0, "Pa"),
    Tag("kestrel/gt1/unit", "JT-GEN", "generator_power", "MW", -5.0, 60.0, "W"),
]


def make_decoder(**limits: float) -> Decoder:
    lim = DecoderLimits(**limits) if limits else DecoderLimits()  # type: ignore[arg-type]
    return Decoder([TagRoute(UNIT, t, t.si) for t in TAGS], lim)


def one(decoder: Decoder, topic: str, payload: bytes, received: float = T0):
    res = decoder.decode(topic, payload, received)
    assert res.received == len(res.readings) + len(res.quarantined) == 1
    return res


# -- payload forms ------------------------------------------------------------------------------


def test_bare_number_is_converted_to_si() -> None:
    d = make_decoder()
    res = one(d, "kestrel/gt1/TT-AMB", b"14.2")
    (r,) = res.readings
    assert r.value == pytest.approx(14.2 + 273.15, abs=1e-12)  # BIPM: T/K = t/°C + 273.15
    assert (r.unit, r.measurement, r.quality, r.raw_value, r.raw_uom) == (
        UNIT,
        "ambient_temperature",
        "good",
        14.2,
        "degC",
    )
    assert r.source_ts == r.received_ts == T0  # no ts in payload: receive time


def test_integer_bare_number_accepted() -> None:
    (r,) = one(make_decoder(), "kestrel/gt1/PT-AMB", b"1013").readings
    assert r.value == pytest.approx(101300.0)  # 1 mbar = 100 Pa (BIPM)


def test_object_per_topic_with_ts_quality_seq() -> None:
    payload = json.dumps(
        {"value": 1013.25, "ts": "2009-02-13T23:31:30Z", "quality": "good", "seq": 41}
    ).encode()
    res = one(make_decoder(), "kestrel/gt1/PT-AMB", payload, received=T0 + 5)
    (r,) = res.readings
    assert r.value == pytest.approx(101325.0)  # 1013.25 mbar = 101 325 Pa (BIPM)
    assert r.source_ts == T0
    assert res.seq == 41


@pytest.mark.parametrize(
    ("ts", "expected"),
    [
        ("2001-09-09T01:46:40Z", 1e9),  # Unix 1e9 milestone (module docstring)
        ("2001-09-09T01:46:40+00:00", 1e9),
        ("2001-09-09T03:46:40+02:00", 1e9),  # same instant, zone honoured
        ("2001-09-09T01:46:40", 1e9),  # naive = UTC (documented)
        ("2001-09-09T01:46:40.250Z", 1e9 + 0.25),
        (1_000_000_000, 1e9),  # epoch seconds
        (1_000_000_000.5, 1e9 + 0.5),
        (1_000_000_000_000, 1e9),  # epoch milliseconds, auto-detected by magnitude
        (1_000_000_000_123, 1e9 + 0.123),
    ],
)
def test_timestamp_forms(ts: object, expected: float) -> None:
    assert parse_timestamp(ts) == pytest.approx(expected, abs=1e-6)
    payload = json.dumps({"value": 10.0, "ts": ts}).encode()
    (r,) = one(make_decoder(), "kestrel/gt1/TT-AMB", payload, received=1e9 + 1).readings
    assert r.source_ts == pytest.approx(expected, abs=1e-6)


@pytest.mark.parametrize(
    ("q", "expected"),
    [
        ("good", "good"),
        ("GOOD", "good"),
        ("uncertain", "uncertain"),
        ("bad", "bad"),
        (192, "good"),
        (255, "good"),
        (191, "uncertain"),
        (64, "uncertain"),
        (63, "bad"),
        (0, "bad"),
        (None, "good"),
    ],
)
def test_quality_forms(q: object, expected: str) -> None:
    # OPC DA quality byte thresholds (module docstring)
    assert parse_quality(q) == expected


@pytest.mark.parametrize("q", [256, -1, True, 1.5, "fine", [192]])
def test_quality_rejects_other_forms(q: object) -> None:
    with pytest.raises(ValueError):
        parse_quality(q)
    payload = json.dumps({"value": 10.0, "quality": q}).encode()
    (x,) = one(make_decoder(), "kestrel/gt1/TT-AMB", payload).quarantined
    assert x.reason == "wrong_type"


def test_uncertain_quality_is_accepted_and_kept() -> None:
    payload = b'{"value": 10.0, "quality": 100}'
    (r,) = one(make_decoder(), "kestrel/gt1/TT-AMB", payload).readings
    assert r.quality == "uncertain"


def test_unit_object_nested_and_flat_give_the_same_readings() -> None:
    values = {"TT-CD": 380.5, "PT-CD": 14.2, "PT-BARO": 101.325, "JT-GEN": 44.1}
    nested = json.dumps({"ts": T0, "seq": 7, "values": values}).encode()
    flat = json.dumps({"ts": T0, "seq": 7, **values}).encode()
    out = []
    for payload in (nested, flat):
        d = make_decoder()
        d.decode("kestrel/gt1/PT-AMB", b"1013.25", T0)  # barometric reference first
        res = d.decode("kestrel/gt1/unit", payload, T0)
        assert res.received == 4 and not res.quarantined and res.seq == 7
        out.append({r.measurement: r.value for r in res.readings})
    assert out[0] == out[1]
    got = out[0]
    assert got["compressor_discharge_temperature"] == pytest.approx(380.5 + 273.15)  # BIPM
    # gauge: 14.2 bar above the measured 1013.25 mbar barometric pressure (1 bar = 1e5 Pa)
    assert got["compressor_discharge_pressure"] == pytest.approx(14.2e5 + 101325.0)
    assert got["ambient_pressure_backup"] == pytest.approx(101325.0)
    assert got["generator_power"] == pytest.approx(44.1e6)


def test_per_value_objects_override_message_fields() -> None:
    payload = json.dumps(
        {"ts": T0, "values": {"TT-CD": {"value": 380.0, "quality": 0}, "JT-GEN": 44.0}}
    ).encode()
    res = make_decoder().decode("kestrel/gt1/unit", payload, T0)
    assert [r.measurement for r in res.readings] == ["generator_power"]
    (q,) = res.quarantined
    assert (q.reason, q.measurement) == ("bad_quality", "compressor_discharge_temperature")


def test_gauge_without_barometric_reference_is_a_conversion_error() -> None:
    res = make_decoder().decode("kestrel/gt1/unit", b'{"PT-CD": 14.2}', T0)
    (q,) = res.quarantined
    assert q.reason == "conversion_error" and "barometric" in q.detail


def test_gauge_with_fixed_reference() -> None:
    tag = Tag(
        "kestrel/gt3/PT-CD",
        "",
        "compressor_discharge_pressure",
        "psig",
        0,
        500,
        "Pa",
        baro_pa=101325.0,
    )
    d = Decoder([TagRoute("KR-GT3", tag, "Pa")])
    (r,) = d.decode(tag.topic, b"14.6959", T0).readings
    # 1 psi = 6894.757 Pa (NIST SP 811, appendix B.8); 14.6959 psi ≈ 1 standard atmosphere
    assert r.value == pytest.approx(101325.0 + 14.6959 * 6894.757293168, rel=1e-9)


# -- rejections -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("topic", "payload", "reason"),
    [
        ("kestrel/gt1/TT-AMB", b"NaN", "non_finite"),
        ("kestrel/gt1/TT-AMB", b"Infinity", "non_finite"),
        ("kestrel/gt1/TT-AMB", b"-Infinity", "non_finite"),
        ("kestrel/gt1/TT-AMB", b'{"value": NaN}', "non_finite"),
        ("kestrel/gt1/TT-AMB", b"1e400", "non_finite"),  # json gives inf for this literal
        ("kestrel/gt1/TT-AMB", b"12,7", "malformed_json"),
        ("kestrel/gt1/TT-AMB", b"", "malformed_json"),
        ("kestrel/gt1/TT-AMB", b"\xff\xfe\x00", "malformed_json"),
        ("kestrel/gt1/TT-AMB", b"[" * 100_00 + b"]" * 100_00, "malformed_json"),
        ("kestrel/gt1/TT-AMB", b"true", "wrong_type"),  # bool is not a number
        ("kestrel/gt1/TT-AMB", b'"12.7"', "wrong_type"),
        ("kestrel/gt1/TT-AMB", b"null", "wrong_type"),
        ("kestrel/gt1/TT-AMB", b'{"val": 12.7}', "wrong_type"),
        ("kestrel/gt1/TT-AMB", b'{"value": false}', "wrong_type"),
        ("kestrel/gt1/TT-AMB", b'{"value": 1, "ts": "yesterday"}', "wrong_type"),
        ("kestrel/gt1/TT-AMB", b'{"value": 1, "ts": true}', "wrong_type"),
        ("kestrel/gt1/TT-AMB", b"99.0", "out_of_range"),  # plausible range -40..55 degC
        ("kestrel/gt1/TT-AMB", b"-280", "nonphysical"),  # -280 °C = -6.85 K
        ("kestrel/gt1/TT-AMB", b"-273.15", "nonphysical"),  # exactly 0 K
        ("kestrel/gt1/PT-AMB", b"0", "nonphysical"),  # p ≤ 0
        ("kestrel/gt1/FQ-GAS", b"-0.5", "nonphysical"),  # negative flow (range allows it)
        ("kestrel/gt1/TT-AMB", b'{"value": 10, "quality": "bad"}', "bad_quality"),
        ("kestrel/gt1/TT-AMB", b'{"value": 10, "quality": 12}', "bad_quality"),
        ("kestrel/gt1/TT-AMB", b'{"value": 10, "ts": %d}' % (T0 + 301), "future_timestamp"),
        ("kestrel/gt1/TT-AMB", b'{"value": 10, "ts": %d}' % (T0 - 86401), "past_timestamp"),
        ("kestrel/gt9/TT-AMB", b"10", "unknown_topic"),
        ("kestrel/gt1/unit", b"10", "wrong_type"),  # unit topic needs an object
        ("kestrel/gt1/unit", b'{"values": [1, 2]}', "wrong_type"),
        ("kestrel/gt1/unit", b'{"TT-XX": 10}', "unknown_key"),
    ],
)
def test_each_bad_input_is_quarantined_with_its_reason(
    topic: str, payload: bytes, reason: str
) -> None:
    res = one(make_decoder(), topic, payload)
    assert not res.readings
    (q,) = res.quarantined
    assert q.reason == reason, q.detail
    assert q.topic == topic and q.received_ts == T0
    assert q.unit == (None if reason == "unknown_topic" else UNIT)


def test_timestamp_window_edges_are_inclusive() -> None:
    d = make_decoder()
    for ts in (T0 + 300, T0 - 86400):
        assert one(d, "kestrel/gt1/TT-AMB", b'{"value": 1, "ts": %d}' % ts).readings


def test_oversized_payload_rejected_before_decoding() -> None:
    d = make_decoder(max_payload_bytes=64, quarantine_payload_limit=16)
    payload = b"1" + b" " * 100  # valid JSON, but too large
    (q,) = one(d, "kestrel/gt1/TT-AMB", payload).quarantined
    assert q.reason == "oversized_payload"
    assert q.payload == payload[:16]


def test_quarantined_payload_is_truncated() -> None:
    d = make_decoder(quarantine_payload_limit=8)
    (q,) = one(d, "kestrel/gt1/TT-AMB", b'"' + b"x" * 500 + b'"').quarantined
    assert len(q.payload) == 8


def test_counts_by_reason_in_a_batch() -> None:
    d = make_decoder()
    msgs = [
        ("kestrel/gt1/TT-AMB", b"10"),
        ("kestrel/gt1/TT-AMB", b"NaN"),
        ("kestrel/gt1/TT-AMB", b"99"),
        ("kestrel/gt1/unit", b'{"JT-GEN": 44, "TT-XX": 1, "TT-YY": 2}'),
        ("elsewhere", b"1"),
    ]
    batch = Batch.from_results([d.decode(t, p, T0) for t, p in msgs])
    assert batch.messages == 5
    assert batch.received == 7
    assert len(batch.readings) + len(batch.quarantined) == batch.received
    assert batch.rejected_by_reason() == {
        "non_finite": 1,
        "out_of_range": 1,
        "unknown_key": 2,
        "unknown_topic": 1,
    }
    assert batch.accepted_by_unit() == {UNIT: 2}


def test_quarantined_rejects_unknown_reason() -> None:
    with pytest.raises(ValueError, match="unknown quarantine reason"):
        Quarantined(0.0, "t", b"", "because", "", None)


@pytest.mark.parametrize(
    "tags",
    [
        [
            Tag("a/b", "", "x_temperature", "K", 0, 1, "K"),
            Tag("a/b", "", "y_temperature", "K", 0, 1, "K"),
        ],
        [
            Tag("a/b", "", "x_temperature", "K", 0, 1, "K"),
            Tag("a/b", "k", "y_temperature", "K", 0, 1, "K"),
        ],
        [Tag("a/b", "ts", "x_temperature", "K", 0, 1, "K")],
        [
            Tag("a/b", "k", "x_temperature", "K", 0, 1, "K"),
            Tag("a/b", "k", "y_temperature", "K", 0, 1, "K"),
        ],
    ],
)
def test_ambiguous_tag_maps_are_refused(tags: list[Tag]) -> None:
    with pytest.raises(DecoderConfigError):
        Decoder([TagRoute(UNIT, t, "K") for t in tags])


def test_physical_limits_from_the_unit_type_schema() -> None:
    tag = Tag("kestrel/gt1/XX", "", "relative_humidity", "percent", -10, 120, "1")
    d = Decoder([TagRoute(UNIT, tag, "1", phys_low=0.0, phys_high=1.0)])
    assert one(d, tag.topic, b"60").readings[0].value == pytest.approx(0.6)
    assert one(d, tag.topic, b"110").quarantined[0].reason == "nonphysical"


# -- sequence numbers -------------------------------------------------------------------------


def test_sequence_gaps_are_detected_and_counted() -> None:
    s = SequenceTracker()
    seen = [s.observe("t", n) for n in (1, 2, 3, 7, 8, 8, 10, 2, 3)]
    assert seen == [0, 0, 0, 3, 0, 0, 1, 0, 0]
    assert (s.gaps, s.missing, s.repeats, s.regressions) == (2, 4, 1, 1)
    assert s.observe("t", None) == 0
    assert s.observe("other", 100) == 0  # first sight of a stream sets its baseline


def test_seq_taken_only_from_integers() -> None:
    d = make_decoder()
    for raw, expected in ((5, 5), (True, None), ("5", None), (-1, None), (2.0, None)):
        payload = json.dumps({"value": 1.0, "seq": raw}).encode()
        assert d.decode("kestrel/gt1/TT-AMB", payload, T0).seq == expected


# -- hypothesis fuzz: no exception escapes, every item accounted for ----------------------------

json_scalars = (
    st.none()
    | st.booleans()
    | st.integers(min_value=-(10**30), max_value=10**30)
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=20)
)
json_values = st.recursive(
    json_scalars,
    lambda children: (
        st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=8), children, max_size=4)
    ),
    max_leaves=12,
)
keys = st.sampled_from(
    ["TT-CD", "PT-CD", "PT-BARO", "JT-GEN", "TT-XX", "ts", "seq", "quality"]
) | st.text(max_size=6).filter(lambda k: k != "values")  # "values" switches to the nested form
ts_values = (
    st.none()
    | st.integers(min_value=-(10**16), max_value=10**16)
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=30)
    | st.sampled_from(["2009-02-13T23:31:30Z", "2009-02-13T23:31:30", "9999-12-31T23:59:59-23:59"])
)
TOPICS = [t.topic for t in TAGS] + ["kestrel/gt1/other", ""]


def _check(res, topic: str) -> None:
    assert res.received == len(res.readings) + len(res.quarantined)
    for r in res.readings:
        assert math.isfinite(r.value) and math.isfinite(r.source_ts)
        assert r.quality in ("good", "uncertain")
    for q in res.quarantined:
        assert q.reason in QUARANTINE_REASONS
        assert q.topic == topic


FUZZ = settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@FUZZ
@given(topic=st.sampled_from(TOPICS), payload=st.binary(max_size=200))
def test_fuzz_arbitrary_bytes(topic: str, payload: bytes) -> None:
    res = make_decoder().decode(topic, payload, T0)
    _check(res, topic)
    if topic != "kestrel/gt1/unit":
        assert res.received == 1


@FUZZ
@given(
    topic=st.sampled_from(TOPICS),
    doc=json_values
    | st.fixed_dictionaries(
        {"value": json_values},
        optional={"ts": ts_values, "quality": json_scalars, "seq": json_scalars},
    ),
)
def test_fuzz_single_value_topics(topic: str, doc: object) -> None:
    res = make_decoder().decode(topic, json.dumps(doc).encode(), T0)
    _check(res, topic)


@FUZZ
@given(
    values=st.dictionaries(keys, json_values | st.floats(min_value=-50, max_value=700), max_size=8),
    nested=st.booleans(),
    ts=ts_values,
    quality=json_scalars,
)
def test_fuzz_unit_objects(
    values: dict[str, object], nested: bool, ts: object, quality: object
) -> None:
    d = make_decoder()
    d.decode("kestrel/gt1/PT-AMB", b"1013.25", T0)
    if nested:
        doc: dict[str, object] = {"ts": ts, "quality": quality, "values": values}
        expected = len(values)
    else:
        doc = {**values, "ts": ts, "quality": quality}
        expected = len([k for k in doc if k not in META_KEYS])
    res = d.decode("kestrel/gt1/unit", json.dumps(doc).encode(), T0)
    _check(res, "kestrel/gt1/unit")
    assert res.received == expected


@FUZZ
@given(
    messages=st.lists(
        st.tuples(
            st.sampled_from(TOPICS),
            st.binary(max_size=60) | json_values.map(lambda v: json.dumps(v).encode()),
        ),
        max_size=20,
    )
)
def test_fuzz_stream_stored_plus_quarantined_equals_received(
    messages: list[tuple[str, bytes]],
) -> None:
    d = make_decoder()
    batch = Batch.from_results([d.decode(t, p, T0) for t, p in messages])
    assert len(batch.readings) + len(batch.quarantined) == batch.received
    assert batch.messages == len(messages)
    assert sum(batch.rejected_by_reason().values()) == len(batch.quarantined)


@FUZZ
@given(raw=ts_values | json_values)
def test_fuzz_parse_timestamp_raises_only_value_error(raw: object) -> None:
    try:
        x = parse_timestamp(raw)
    except ValueError:
        return
    assert math.isfinite(x)


# -- with the real plant-file classes ---------------------------------------------------------

PLANT_TOML = """
[site]
name = "Kestrel Ridge Energy Park"

[daemon]
max_payload_bytes = 4096
future_tolerance_s = 60
past_tolerance_s = 3600

[units.KR-GT1]
unit_type = "gas_turbine"
fuel = { lower_heating_value = 42.8e6, carbon_mass_fraction = 0.866, hydrogen_mass_fraction = 0.134 }

  [[units.KR-GT1.tags]]
  topic = "kestrel/gt1/PT-AMB"
  measurement = "ambient_pressure"
  uom = "mbar"
  low = 800.0
  high = 1100.0

  [[units.KR-GT1.tags]]
  topic = "kestrel/gt1/unit"
  key = "PT-CD"
  measurement = "compressor_discharge_pressure"
  uom = "barg"
  low = 1.0
  high = 30.0
  baro_measurement = "ambient_pressure"

  [[units.KR-GT1.tags]]
  topic = "kestrel/gt1/unit"
  key = "TT-CD"
  measurement = "compressor_discharge_temperature"
  uom = "degC"
  low = 0.0
  high = 650.0
  max_age_s = 25.0
"""


def test_decoder_from_a_loaded_plant_file(tmp_path) -> None:
    from daemon.config import load_plant

    # the other measurements the gas-turbine type requires, as plain SI tags
    others = [
        ("ambient_temperature", "K", 230, 330),
        ("ambient_relative_humidity", "fraction", 0, 1),
        ("compressor_inlet_temperature", "K", 230, 330),
        ("compressor_inlet_pressure", "Pa", 8e4, 1.1e5),
        ("exhaust_temperature", "K", 500, 1000),
        ("exhaust_pressure", "Pa", 9e4, 1.2e5),
        ("fuel_mass_flow", "kg/s", 0, 5),
        ("generator_power", "W", 0, 6e7),
    ]
    extra = "".join(
        f'\n  [[units.KR-GT1.tags]]\n  topic = "kestrel/gt1/{m}"\n  measurement = "{m}"\n'
        f'  uom = "{u}"\n  low = {lo}\n  high = {hi}\n'
        for m, u, lo, hi in others
    )
    path = tmp_path / "plant.toml"
    path.write_text(PLANT_TOML + extra)
    try:
        plant = load_plant(path)
    except Exception as exc:  # the unit type must be importable for load_plant
        pytest.fail(f"plant file did not load: {exc}")
    d = Decoder.from_plant(plant)
    assert d.limits.max_payload_bytes == 4096
    assert d.limits.future_tolerance_s == 60 and d.limits.past_tolerance_s == 3600
    routes = {r.measurement: r for r in d.routes()}
    assert routes["compressor_discharge_pressure"].si_unit == "Pa"  # from the unit type schema
    # gauge value before any barometric reading: refused, not guessed
    res = d.decode("kestrel/gt1/unit", b'{"PT-CD": 14.2}', T0)
    assert res.quarantined[0].reason == "conversion_error"
    d.decode("kestrel/gt1/PT-AMB", b"1013.25", T0)
    res = d.decode("kestrel/gt1/unit", b'{"PT-CD": 14.2, "TT-CD": 380.0}', T0)
    got = {r.measurement: r.value for r in res.readings}
    assert got["compressor_discharge_pressure"] == pytest.approx(14.2e5 + 101325.0)  # BIPM
    assert got["compressor_discharge_temperature"] == pytest.approx(653.15)  # BIPM
    assert d.decode("kestrel/gt1/PT-AMB", b"1" * 5000, T0).quarantined[0].reason == (
        "oversized_payload"
    )
    # the same plant builds the assembler: ages from the tags, tick from [daemon]
    from daemon.assembly import Assembler, UnitSpec

    spec = UnitSpec.from_config("KR-GT1", plant.units["KR-GT1"])
    assert spec.max_age_s["compressor_discharge_temperature"] == 25.0
    assert spec.unit_type == "gas_turbine"
    a = Assembler.from_plant(plant)
    a.ingest(res.readings)
    (snap,) = a.tick(T0)
    assert snap.values["compressor_discharge_temperature"] == pytest.approx(653.15)
    assert snap.quality["generator_power"] != 0  # never received

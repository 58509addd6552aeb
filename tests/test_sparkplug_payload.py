"""Sparkplug B schema, topics, metric values, quality codes, addresses and STATE messages.

Sources of the check values:

* Eclipse Sparkplug 3.0.0 specification (2022-11-16): chapter 4 "Topics and Messages" (topic
  structure, ids without ``+ / #``, ``spBv1.0/STATE/<host id>``); section 6.4.16 "Datatype
  Details" (which protobuf field carries which datatype); section 6.4.9 "Quality Codes"
  (0 BAD, 192 GOOD, 500 STALE, as an Int32 property ``Quality``); the NCMD example of the
  payload chapter (``Node Control/Rebirth`` = true, no ``seq``); the STATE payload
  ``{"online": .., "timestamp": ..}`` of section 4.2.3.
* Two's complement: -200 as a 16-bit value is 0xFF38 and as a 32-bit value 0xFFFFFF38; -1 as
  an 8-bit value is 0xFF (definition of two's complement; common practice).
* 12.1 is not exact in IEEE 754 binary32: the nearest float32 is 12.100000381469727 (IEEE
  754-2008; common practice), and the shortest decimal that round-trips it is "12.1".
* OPC UA StatusCode severity bits 31-30: 00 Good, 01 Uncertain, 10 Bad (OPC 10000-4, section
  7.39 "StatusCode"; from memory); 0x80000000 is Bad, 0x40000000 Uncertain.
"""

from __future__ import annotations

import filecmp
import json
import subprocess
import sys
from pathlib import Path

import pytest

from daemon.feeds.sparkplug import sparkplug_b_pb2 as pb
from daemon.feeds.sparkplug.address import MetricAddress
from daemon.feeds.sparkplug.payload import (
    MetricValueError,
    metric_quality,
    metric_value,
    parse_payload,
    quality_of_code,
    rebirth_request,
)
from daemon.feeds.sparkplug.primary_host import HostSession, parse_state, state_payload
from daemon.feeds.sparkplug.topic import SparkplugTopic, TopicError, parse_topic

ROOT = Path(__file__).resolve().parents[1]
DT = pb.DataType


# -- the schema ----------------------------------------------------------------------------------


def test_generated_classes_match_the_proto(tmp_path: Path) -> None:
    """The committed _pb2.py/.pyi are exactly what tools/gen_sparkplug_pb2.py makes now."""
    out = tmp_path / "gen"
    subprocess.run(
        [sys.executable, str(ROOT / "tools" / "gen_sparkplug_pb2.py"), "--out", str(out)],
        check=True,
        capture_output=True,
    )
    for name in ("sparkplug_b_pb2.py", "sparkplug_b_pb2.pyi"):
        committed = ROOT / "daemon" / "feeds" / "sparkplug" / name
        assert filecmp.cmp(out / name, committed, shallow=False), (
            f"{name} is stale: run tools/gen_sparkplug_pb2.py and commit the result"
        )


def test_field_numbers_are_the_specifications() -> None:
    """Wire compatibility: field numbers of Payload and Metric (Sparkplug 3.0.0, 6.4.1)."""
    payload = {f.name: f.number for f in pb.Payload.DESCRIPTOR.fields}
    assert payload == {"timestamp": 1, "metrics": 2, "seq": 3, "uuid": 4, "body": 5}
    metric = {f.name: f.number for f in pb.Payload.Metric.DESCRIPTOR.fields}
    assert metric == {
        "name": 1, "alias": 2, "timestamp": 3, "datatype": 4, "is_historical": 5,
        "is_transient": 6, "is_null": 7, "metadata": 8, "properties": 9, "int_value": 10,
        "long_value": 11, "float_value": 12, "double_value": 13, "boolean_value": 14,
        "string_value": 15, "bytes_value": 16, "dataset_value": 17, "template_value": 18,
        "extension_value": 19,
    }  # fmt: skip
    prop = {f.name: f.number for f in pb.Payload.PropertyValue.DESCRIPTOR.fields}
    assert prop["type"] == 1 and prop["is_null"] == 2 and prop["propertysets_value"] == 10
    assert (DT.Int8, DT.UInt64, DT.Float, DT.Double, DT.Boolean, DT.String) == (1, 8, 9, 10, 11, 12)
    assert (DT.Template, DT.PropertySetList, DT.DateTimeArray) == (19, 21, 34)


def test_known_bytes_decode() -> None:
    """A payload written by hand from the protobuf wire format (field 1 varint, field 2
    length-delimited Metric{name=1 "T", datatype=4 varint 9, float_value=12 fixed32})."""
    metric = b"\x0a\x01T" + b"\x20\x09" + b"\x65" + bytes.fromhex("9a994141")  # 12.1f LE
    raw = b"\x08\xe8\x07" + b"\x12" + bytes([len(metric)]) + metric + b"\x18\x05"
    p = parse_payload(raw)
    assert (p.timestamp, p.seq, p.metrics[0].name) == (1000, 5, "T")
    assert metric_value(p.metrics[0], DT.Float) == 12.1


# -- values by datatype ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("datatype", "field", "raw", "expected"),
    [
        (DT.Int8, "int_value", 0xFF, -1),  # own width
        (DT.Int8, "int_value", 0xFFFFFFFF, -1),  # sign-extended to 32 bits
        (DT.Int16, "int_value", 0xFF38, -200),
        (DT.Int16, "int_value", 0xFFFFFF38, -200),
        (DT.Int32, "int_value", 0x80000000, -(2**31)),
        (DT.Int64, "long_value", 2**64 - 1, -1),
        (DT.UInt8, "int_value", 255, 255),
        (DT.UInt16, "int_value", 65535, 65535),
        (DT.UInt32, "int_value", 2**32 - 1, 2**32 - 1),
        (DT.UInt64, "long_value", 2**64 - 1, 2**64 - 1),
        (DT.Int32, "long_value", 7, 7),  # a long field for a short type still reads
    ],
)
def test_integer_datatypes(datatype: int, field: str, raw: int, expected: int) -> None:
    m = pb.Payload.Metric(**{field: raw})
    assert metric_value(m, datatype) == expected


@pytest.mark.parametrize(
    ("datatype", "raw"), [(DT.UInt8, 256), (DT.Int8, 0x1FF), (DT.UInt16, 70000)]
)
def test_integer_that_does_not_fit_is_wrong_type(datatype: int, raw: int) -> None:
    with pytest.raises(MetricValueError) as err:
        metric_value(pb.Payload.Metric(int_value=raw), datatype)
    assert err.value.reason == "wrong_type"


def test_float_is_the_shortest_decimal_of_the_float32() -> None:
    m = pb.Payload.Metric(float_value=12.1)
    assert m.float_value == 12.100000381469727  # IEEE 754 binary32 nearest to 12.1
    assert metric_value(m, DT.Float) == 12.1
    assert metric_value(pb.Payload.Metric(double_value=0.1), DT.Double) == 0.1


def test_boolean_string_null_and_mismatch() -> None:
    assert metric_value(pb.Payload.Metric(boolean_value=True), DT.Boolean) is True
    assert metric_value(pb.Payload.Metric(string_value="on"), DT.String) == "on"
    assert metric_value(pb.Payload.Metric(is_null=True), DT.Double) is None
    for m, dt in [
        (pb.Payload.Metric(string_value="12"), DT.Double),
        (pb.Payload.Metric(double_value=1.0), DT.Int32),
        (pb.Payload.Metric(), DT.Float),
    ]:
        with pytest.raises(MetricValueError) as err:
            metric_value(m, dt)
        assert err.value.reason == "wrong_type"


@pytest.mark.parametrize(
    "datatype",
    [DT.DateTime, DT.UUID, DT.DataSet, DT.Bytes, DT.File, DT.Template, DT.DoubleArray, 99],
)
def test_other_datatypes_are_refused(datatype: int) -> None:
    with pytest.raises(MetricValueError) as err:
        metric_value(pb.Payload.Metric(long_value=1), datatype)
    assert err.value.reason == "unsupported_datatype"


def test_malformed_bytes() -> None:
    with pytest.raises(MetricValueError) as err:
        parse_payload(b"\x12\xff\xff\xff")  # length-delimited field longer than the data
    assert err.value.reason == "malformed_protobuf"


# -- quality --------------------------------------------------------------------------------------


def _with_quality(code: int) -> pb.Payload.Metric:
    m = pb.Payload.Metric(double_value=1.0)
    m.properties.keys.append("Quality")
    m.properties.values.add(type=DT.Int32, int_value=code)
    return m


@pytest.mark.parametrize(
    ("code", "quality", "detail_has"),
    [
        (192, "good", None),
        (0, "bad", "BAD"),
        (500, "bad", "STALE"),
        (100, "uncertain", "OPC DA"),
        (0x40000000, "uncertain", "OPC UA"),
        (0x80000000, "bad", "OPC UA"),
        (0x00A90000, "good", "OPC UA"),
        (300, "bad", "not a known quality code"),
    ],
)
def test_quality_codes(code: int, quality: str, detail_has: str | None) -> None:
    q = metric_quality(_with_quality(code))
    assert q.quality == quality
    if detail_has is None:
        assert q.detail is None
    else:
        assert q.detail is not None and detail_has in q.detail
    assert quality_of_code(code) == q


def test_no_quality_property_is_good() -> None:
    assert metric_quality(pb.Payload.Metric(double_value=1.0)).quality == "good"
    m = pb.Payload.Metric(double_value=1.0)
    m.properties.keys.append("engUnit")
    m.properties.values.add(type=DT.String, string_value="degC")
    assert metric_quality(m).quality == "good"


# -- commands, topics, addresses, STATE ----------------------------------------------------------


def test_rebirth_request_payload() -> None:
    p = pb.Payload.FromString(rebirth_request(1_700_000_000_123))
    assert p.timestamp == 1_700_000_000_123 and not p.HasField("seq")
    (m,) = p.metrics
    assert (m.name, m.datatype, m.boolean_value) == ("Node Control/Rebirth", DT.Boolean, True)


@pytest.mark.parametrize(
    ("topic", "expected"),
    [
        ("spBv1.0/KR/NBIRTH/edge1", ("NBIRTH", "KR", "edge1", None)),
        ("spBv1.0/KR/DDATA/edge1/GT 1", ("DDATA", "KR", "edge1", "GT 1")),
        ("spBv1.0/KR/NCMD/edge1", ("NCMD", "KR", "edge1", None)),
    ],
)
def test_topics_parse_and_print(topic: str, expected: tuple[str, str, str, str | None]) -> None:
    t = parse_topic(topic)
    assert (t.message_type, t.group, t.edge_node, t.device) == expected
    assert str(t) == topic


def test_state_topic() -> None:
    t = parse_topic("spBv1.0/STATE/brayscope-kr")
    assert (t.message_type, t.host_id) == ("STATE", "brayscope-kr")
    assert str(SparkplugTopic.state("brayscope-kr")) == "spBv1.0/STATE/brayscope-kr"


@pytest.mark.parametrize(
    ("topic", "why"),
    [
        ("spAv1.0/KR/NDATA/e", "namespace"),
        ("spBv1.0/KR/NDATA", "levels"),
        ("spBv1.0/KR/XDATA/e", "unknown message type"),
        ("spBv1.0/KR/NDATA/e/dev", "takes no device id"),
        ("spBv1.0/KR/DDATA/e", "needs a device id"),
        ("spBv1.0//NDATA/e", "empty group"),
    ],
)
def test_bad_topics(topic: str, why: str) -> None:
    with pytest.raises(TopicError, match=why):
        parse_topic(topic)


def test_ids_refuse_reserved_characters() -> None:
    with pytest.raises(TopicError, match="reserved"):
        SparkplugTopic.node("NDATA", "KR", "edge/1")
    with pytest.raises(TopicError, match="not an edge-node message type"):
        SparkplugTopic.node("DDATA", "KR", "edge1")


def test_metric_address_forms() -> None:
    a = MetricAddress.parse("spBv1.0/KR/edge1/GT1#Compressor/Discharge #2")
    assert a.key == ("KR", "edge1", "GT1", "Compressor/Discharge #2")
    assert MetricAddress.parse(str(a)) == a
    node = MetricAddress.model_validate("KR/edge1#Site/Barometer")
    assert node.device is None and str(node) == "spBv1.0/KR/edge1#Site/Barometer"
    table = MetricAddress.model_validate({"group": "KR", "edge_node": "edge1", "metric": "x"})
    assert table.key == ("KR", "edge1", "", "x")


@pytest.mark.parametrize(
    ("text", "why"),
    [
        ("KR/edge1/GT1", "has no '#'"),
        ("KR#x", "got 1 level"),
        ("KR/a/b/c#x", "got 4 level"),
        ("KR/ed+ge#x", "reserved"),
        ("KR/edge1#", "at least 1 character"),
    ],
)
def test_metric_address_errors(text: str, why: str) -> None:
    with pytest.raises(ValueError, match=why):
        MetricAddress.parse(text)


def test_state_payloads_round_trip() -> None:
    raw = state_payload(True, 1_700_000_000_000)
    assert json.loads(raw) == {"online": True, "timestamp": 1_700_000_000_000}
    assert parse_state(raw).online is True
    for bad in (b"ONLINE", b"[]", b'{"online": 1, "timestamp": 5}', b'{"online": true}'):
        with pytest.raises(ValueError, match="STATE"):
            parse_state(bad)


def test_host_session_sequence() -> None:
    """Will and birth share the connection's timestamp; the death has the current time."""
    clock = iter([1000.0, 1005.5])
    s = HostSession("brayscope-kr", clock=lambda: next(clock))
    with pytest.raises(RuntimeError, match="begin"):
        s.will()
    assert s.begin() == 1_000_000
    will, birth = s.will(), s.birth()
    assert will.topic == birth.topic == "spBv1.0/STATE/brayscope-kr"
    assert (will.qos, will.retain, birth.qos, birth.retain) == (1, True, 1, True)
    assert parse_state(will.payload).online is False and parse_state(birth.payload).online
    assert parse_state(will.payload).timestamp_ms == parse_state(birth.payload).timestamp_ms
    assert parse_state(s.death().payload).timestamp_ms == 1_005_500
    assert s.subscriptions(["spBv1.0/KR/+/edge1/#"]) == [
        ("spBv1.0/STATE/brayscope-kr", 1),
        ("spBv1.0/KR/+/edge1/#", 1),
    ]
    # our own state says offline (a late will): publish the birth again; other hosts: nothing
    again = s.on_state("spBv1.0/STATE/brayscope-kr", state_payload(False, 999))
    assert again is not None and parse_state(again.payload).online
    assert s.on_state("spBv1.0/STATE/brayscope-kr", birth.payload) is None
    assert s.on_state("spBv1.0/STATE/other-host", state_payload(False, 1)) is None

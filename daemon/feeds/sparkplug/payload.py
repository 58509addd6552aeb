"""Sparkplug B payloads: parse, metric values by datatype, the Quality property, commands.

Pure code over the generated classes (:mod:`daemon.feeds.sparkplug.sparkplug_b_pb2`).

Datatypes (Eclipse Sparkplug 3.0.0, section 6.4.16 "Datatype Details"): Int8, Int16, Int32,
UInt8, UInt16, UInt32 travel in the ``uint32 int_value`` field, Int64 and UInt64 in
``uint64 long_value``, Float in ``float_value``, Double in ``double_value``, Boolean in
``boolean_value``, String (and Text) in ``string_value``.  Signed types are two's complement;
an encoder may sign-extend a short type to the field's 32 or 64 bits or send only its own
width: both decode to the same number, anything that fits neither is ``wrong_type``.  A Float
is returned as the shortest decimal that round-trips the 32-bit value (``12.1``, not
``12.100000381469727``).  Every other datatype (DateTime, UUID, DataSet, Bytes, File,
Template, arrays, unknown codes) is ``unsupported_datatype`` when a tag asks for it.

Quality (section 6.4.9 "Quality Codes"): the metric property ``Quality`` (type Int32) is 0 BAD,
192 GOOD or 500 STALE; absent means GOOD.  We map GOOD → good, BAD and STALE → bad (a stale
value is not the current one, so no result is computed from it), and, for sources that pass
OPC codes through, other codes 0..255 by the OPC DA quality byte (≥ 192 good, 64..191
uncertain, < 64 bad) and 32-bit OPC UA StatusCodes by their severity bits (00 good, 01
uncertain, 1x bad).  Anything else is bad, with the code in the detail.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import numpy as np

from daemon.feeds.sparkplug import sparkplug_b_pb2 as pb

__all__ = [
    "DATATYPE_NAMES",
    "SUPPORTED_DATATYPES",
    "MetricValueError",
    "Quality",
    "datatype_name",
    "metric_quality",
    "metric_value",
    "parse_payload",
    "quality_of_code",
    "rebirth_request",
]

DT = pb.DataType

#: Datatype code → name (the specification's enum names).
DATATYPE_NAMES: Final[dict[int, str]] = {int(v): k for k, v in DT.items()}

# code → (bits, signed, field)
_INTEGER: Final[dict[int, tuple[int, bool, str]]] = {
    DT.Int8: (8, True, "int_value"),
    DT.Int16: (16, True, "int_value"),
    DT.Int32: (32, True, "int_value"),
    DT.Int64: (64, True, "long_value"),
    DT.UInt8: (8, False, "int_value"),
    DT.UInt16: (16, False, "int_value"),
    DT.UInt32: (32, False, "int_value"),
    DT.UInt64: (64, False, "long_value"),
}
_FIELD_BITS: Final = {"int_value": 32, "long_value": 64}

#: Datatypes whose values brayscope reads.
SUPPORTED_DATATYPES: Final[frozenset[int]] = frozenset(
    {*_INTEGER, DT.Float, DT.Double, DT.Boolean, DT.String, DT.Text}
)

#: Name of the node control metric a Rebirth Request writes.
REBIRTH_METRIC: Final = "Node Control/Rebirth"
#: Name of the birth/death sequence metric.
BDSEQ_METRIC: Final = "bdSeq"

_QUALITY_GOOD: Final = 192
_QUALITY_BAD: Final = 0
_QUALITY_STALE: Final = 500


class MetricValueError(Exception):
    """A metric value that cannot be read: ``reason`` (a quarantine code) and ``detail``."""

    def __init__(self, reason: str, detail: str) -> None:
        super().__init__(detail)
        self.reason = reason
        self.detail = detail


def datatype_name(code: int) -> str:
    """Name of a datatype code (``"Int32"``), or ``"code N"`` for an unknown one."""
    return DATATYPE_NAMES.get(code, f"code {code}")


def parse_payload(payload: bytes) -> pb.Payload:
    """Parse a Sparkplug B payload.

    Raises
    ------
    MetricValueError
        ``malformed_protobuf`` when the bytes are not a ``Payload`` message.
    """
    try:
        return pb.Payload.FromString(payload)
    except Exception as exc:  # DecodeError, RecursionError, ... never escape the decoder
        raise MetricValueError(
            "malformed_protobuf", f"not a Sparkplug B payload: {str(exc)[:200]}"
        ) from None


def _integer(raw: int, bits: int, signed: bool, field: str, name: str) -> int:
    width = _FIELD_BITS[field]
    if not signed:
        if raw >= 1 << bits:
            raise MetricValueError("wrong_type", f"{raw} does not fit {name}")
        return raw
    lo, hi = -(1 << (bits - 1)), (1 << (bits - 1)) - 1
    v = raw - (1 << width) if raw >= 1 << (width - 1) else raw  # sign-extended to the field
    if lo <= v <= hi:
        return v
    if 0 <= raw < 1 << bits:  # only the type's own width was sent
        return raw - (1 << bits) if raw > hi else raw
    raise MetricValueError("wrong_type", f"{raw} does not fit {name}")


def metric_value(metric: pb.Payload.Metric, datatype: int) -> int | float | bool | str | None:
    """The value of a metric read as ``datatype`` (from its birth certificate).

    Parameters
    ----------
    metric : Payload.Metric
        The metric.
    datatype : int
        Its datatype code.

    Returns
    -------
    int, float, bool, str or None
        None when the metric says ``is_null``.

    Raises
    ------
    MetricValueError
        ``unsupported_datatype`` for a datatype brayscope does not read; ``wrong_type`` when
        the value field does not match the datatype or the number does not fit it.

    Examples
    --------
    >>> m = pb.Payload.Metric(datatype=pb.DataType.Int16, int_value=0xFFFFFF38)
    >>> metric_value(m, pb.DataType.Int16)
    -200
    """
    if datatype not in SUPPORTED_DATATYPES:
        raise MetricValueError(
            "unsupported_datatype", f"datatype {datatype_name(datatype)} is not read by brayscope"
        )
    if metric.is_null:
        return None
    which = metric.WhichOneof("value")
    name = datatype_name(datatype)
    if which is None:
        raise MetricValueError("wrong_type", f"{name} metric without a value (and not is_null)")
    if datatype in _INTEGER:
        bits, signed, _ = _INTEGER[datatype]
        if which not in _FIELD_BITS:
            raise MetricValueError("wrong_type", f"{name} value sent in {which}")
        return _integer(int(getattr(metric, which)), bits, signed, which, name)
    if datatype in (DT.Float, DT.Double):
        if which == "float_value":
            return float(str(np.float32(metric.float_value)))
        if which == "double_value":
            return float(metric.double_value)
        raise MetricValueError("wrong_type", f"{name} value sent in {which}")
    if datatype == DT.Boolean:
        if which != "boolean_value":
            raise MetricValueError("wrong_type", f"Boolean value sent in {which}")
        return bool(metric.boolean_value)
    if which != "string_value":  # String, Text
        raise MetricValueError("wrong_type", f"{name} value sent in {which}")
    return str(metric.string_value)


@dataclass(frozen=True, slots=True)
class Quality:
    """A metric's quality: ``"good"``, ``"uncertain"`` or ``"bad"``, and what the source said."""

    quality: str
    detail: str | None = None


_GOOD = Quality("good")


def quality_of_code(code: int) -> Quality:
    """Map a quality code (Sparkplug, OPC DA byte or OPC UA StatusCode) to our quality.

    Examples
    --------
    >>> quality_of_code(192).quality, quality_of_code(500).quality, quality_of_code(100).quality
    ('good', 'bad', 'uncertain')
    >>> quality_of_code(0x40000000).quality   # OPC UA severity bits 01: uncertain
    'uncertain'
    """
    if code == _QUALITY_GOOD:
        return _GOOD
    if code == _QUALITY_STALE:
        return Quality("bad", "Sparkplug Quality 500 (STALE)")
    if code == _QUALITY_BAD:
        return Quality("bad", "Sparkplug Quality 0 (BAD)")
    if 0 <= code <= 255:
        q = "good" if code >= 192 else "uncertain" if code >= 64 else "bad"
        return Quality(q, f"Sparkplug Quality {code} (OPC DA quality byte: {q})")
    if 0x10000 <= code <= 0xFFFFFFFF:
        severity = code >> 30
        q = "good" if severity == 0 else "uncertain" if severity == 1 else "bad"
        return Quality(q, f"Sparkplug Quality 0x{code:08X} (OPC UA StatusCode: {q})")
    return Quality("bad", f"Sparkplug Quality {code} is not a known quality code")


def metric_quality(metric: pb.Payload.Metric) -> Quality:
    """The quality a metric's ``Quality`` property gives (good when it has none)."""
    if not metric.HasField("properties"):
        return _GOOD
    props = metric.properties
    for key, value in zip(props.keys, props.values, strict=False):
        if key.lower() != "quality":
            continue
        if value.is_null:
            return _GOOD
        which = value.WhichOneof("value")
        if which == "int_value":
            # Int32 in a uint32 field: 0, 192 and 500 read the same signed or not
            return quality_of_code(int(value.int_value))
        if which == "long_value":
            return quality_of_code(int(value.long_value))
        return Quality("bad", f"Sparkplug Quality property sent as {which}, not an integer")
    return _GOOD


def rebirth_request(timestamp_ms: int) -> bytes:
    """The payload of a Rebirth Request (an ``NCMD`` writing ``Node Control/Rebirth = true``).

    Publish it on ``spBv1.0/<group>/NCMD/<edge node>`` with QoS 0, retain false (Sparkplug
    3.0.0, section 6.4.12 NCMD and section 5.9 "Commands"); command payloads carry no ``seq``.

    Examples
    --------
    >>> p = pb.Payload.FromString(rebirth_request(1_700_000_000_000))
    >>> (p.metrics[0].name, p.metrics[0].boolean_value, p.HasField("seq"))
    ('Node Control/Rebirth', True, False)
    """
    msg = pb.Payload(timestamp=timestamp_ms)
    msg.metrics.add(
        name=REBIRTH_METRIC, timestamp=timestamp_ms, datatype=DT.Boolean, boolean_value=True
    )
    return msg.SerializeToString()

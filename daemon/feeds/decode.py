"""Payload decoding and validation: bytes from a topic → :class:`Reading` or :class:`Quarantined`.

Pure code, no I/O: the feed hands over ``(topic, payload, received_ts)`` and gets back the
accepted readings (SI, converted once at this boundary) and the rejected items, each with a
reason code from :data:`daemon.types.QUARANTINE_REASONS`.

Payload forms (chosen per topic from the tag map, never guessed from the bytes):

* **one tag per topic** (the topic's only tag has ``key = ""``):

  - a bare JSON number: ``12.7``
  - a JSON object: ``{"value": 12.7, "ts": ..., "quality": ..., "seq": 1234}``; other
    fields are ignored.

* **one unit object per topic** (the topic's tags have keys):

  - nested: ``{"ts": ..., "seq": n, "values": {"TT-AMB": 14.2, ...}}``
  - flat: ``{"ts": ..., "seq": n, "TT-AMB": 14.2, ...}`` (``ts``, ``seq``, ``quality`` and
    ``values`` are reserved names, never tag keys).

  A value inside a unit object may itself be an object ``{"value": .., "ts": .., "quality": ..}``
  whose fields override the message-level ones.

Timestamps (``ts``): ISO 8601 text (a zone designator is honoured; a *naive* time is taken as
UTC), or a JSON number of seconds since the Unix epoch; numbers with magnitude ≥ 1e11 are taken
as milliseconds (1e11 s is the year 5138, 1e11 ms is March 1973, so plant clocks never make the
two ambiguous).  Without ``ts`` the receive time is the source time.

Quality: ``"good"``, ``"uncertain"``, ``"bad"`` (any case), or an OPC-style integer quality code
0..255: ≥ 192 good, 64..191 uncertain, < 64 bad.  Without ``quality`` a value is good.

Accounting (the invariant the tests check with hypothesis): every message yields
``received`` items, ``received == len(readings) + len(quarantined)``.  ``received`` is the number
of values a unit object carries (configured or not), and 1 for every other message — also for a
message rejected as a whole (oversized, malformed, unknown topic, not an object ...).

Checks, in this order per value: type (a JSON number; ``true``/``false`` are not numbers) →
finite → timestamp (parsable, within ``future_tolerance_s`` / ``past_tolerance_s`` of the
receive time) → quality (bad is rejected) → conversion to SI (``conversion_error``) → physically
possible in SI (T ≤ 0 K, p ≤ 0 Pa, negative mass flow → ``nonphysical``) → plausible range
``[low, high]`` of the tag, in the tag's own unit (``out_of_range``) → the unit type's
physically possible range of the measurement in SI (``nonphysical``; the plant-file check
normally keeps tag ranges inside it, so this is a backstop).

The only state a :class:`Decoder` keeps is the latest accepted barometric pressure per unit
(for gauge-pressure tags); :class:`SequenceTracker` keeps the last sequence number per stream.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any, Protocol

from daemon.types import Quarantined, Reading

__all__ = [
    "Batch",
    "DecodeResult",
    "Decoder",
    "DecoderConfigError",
    "DecoderLimits",
    "SequenceTracker",
    "TagLike",
    "TagRoute",
    "parse_quality",
    "parse_timestamp",
]

#: Reserved field names of unit objects (never tag keys).
META_KEYS = frozenset({"ts", "seq", "quality", "values"})

#: Epoch numbers at or above this magnitude are milliseconds, below it seconds.
MS_THRESHOLD = 1e11

#: Measurement whose accepted value is the barometric reference of a unit's gauge tags.
DEFAULT_BARO_MEASUREMENT = "ambient_pressure"


class DecoderConfigError(ValueError):
    """The tag map cannot be decoded unambiguously (a caller/config error, not plant data)."""


class TagLike(Protocol):
    """What the decoder needs from a tag of the plant file (``daemon.config.TagConfig``)."""

    @property
    def topic(self) -> str: ...
    @property
    def key(self) -> str: ...
    @property
    def measurement(self) -> str: ...
    @property
    def uom(self) -> str: ...
    @property
    def low(self) -> float: ...
    @property
    def high(self) -> float: ...

    def to_si(self, value: float, baro_pa: float | None = None) -> float: ...


@dataclass(frozen=True, slots=True)
class TagRoute:
    """A tag resolved for decoding: where its values come from and where they go.

    Attributes
    ----------
    unit : str
        Unit name.
    tag : TagLike
        The tag (topic, key, measurement, uom, plausible range, ``to_si``).
    si_unit : str or None
        SI unit of the measurement (``"K"``, ``"Pa"``, ``"kg/s"``, ``"W"``, ``"1"``) when known;
        drives the built-in physical checks (T ≤ 0 K, p ≤ 0 Pa, negative flow).
    phys_low, phys_high : float
        Physically possible range in SI from the unit type's measurement schema
        (``FieldSpec.low``/``high``); values outside are ``nonphysical``.
    """

    unit: str
    tag: TagLike
    si_unit: str | None = None
    phys_low: float = -math.inf
    phys_high: float = math.inf

    @property
    def measurement(self) -> str:
        return self.tag.measurement


@dataclass(frozen=True, slots=True)
class DecoderLimits:
    """Limits applied by the decoder (from the plant file's ``[daemon]`` table).

    Attributes
    ----------
    max_payload_bytes : int
        Larger payloads are rejected before any decoding.
    future_tolerance_s : float
        Source timestamps more than this ahead of the receive time are rejected [s].
    past_tolerance_s : float
        Source timestamps more than this behind the receive time are rejected [s].
    quarantine_payload_limit : int
        Quarantined payloads are truncated to this many bytes.
    """

    max_payload_bytes: int = 65536
    future_tolerance_s: float = 300.0
    past_tolerance_s: float = 86400.0
    quarantine_payload_limit: int = 1024


@dataclass(frozen=True, slots=True)
class DecodeResult:
    """Outcome of decoding one message.

    ``received == len(readings) + len(quarantined)`` always holds.
    """

    topic: str
    received: int
    readings: tuple[Reading, ...]
    quarantined: tuple[Quarantined, ...]
    seq: int | None = None


@dataclass(frozen=True, slots=True)
class Batch:
    """Decoded output of several messages, committed (and acknowledged) together.

    Attributes
    ----------
    readings : tuple of Reading
        Accepted readings, in arrival order.
    quarantined : tuple of Quarantined
        Rejected items, in arrival order.
    messages : int
        Number of messages in the batch.
    received : int
        Number of items the messages carried; ``received == len(readings) + len(quarantined)``.
    duplicates : int
        Messages the broker flagged as redeliveries (DUP), informational.
    """

    readings: tuple[Reading, ...]
    quarantined: tuple[Quarantined, ...]
    messages: int
    received: int
    duplicates: int = 0

    @classmethod
    def from_results(cls, results: Sequence[DecodeResult], dups: int = 0) -> Batch:
        """Concatenate decode results (in order) into one batch."""
        readings: list[Reading] = []
        quarantined: list[Quarantined] = []
        received = 0
        for r in results:
            readings.extend(r.readings)
            quarantined.extend(r.quarantined)
            received += r.received
        return cls(tuple(readings), tuple(quarantined), len(results), received, dups)

    def accepted_by_unit(self) -> dict[str, int]:
        """Number of accepted readings per unit."""
        out: dict[str, int] = {}
        for r in self.readings:
            out[r.unit] = out.get(r.unit, 0) + 1
        return out

    def rejected_by_reason(self) -> dict[str, int]:
        """Number of quarantined items per reason code."""
        out: dict[str, int] = {}
        for q in self.quarantined:
            out[q.reason] = out.get(q.reason, 0) + 1
        return out


class _Reject(Exception):  # noqa: N818 - internal control flow, never escapes this module
    def __init__(self, reason: str, detail: str) -> None:
        super().__init__(detail)
        self.reason = reason
        self.detail = detail


class _NonFiniteConstantError(ValueError):
    pass


def _reject_constant(name: str) -> Any:
    raise _NonFiniteConstantError(name)


def _loads(payload: bytes) -> Any:
    """json.loads that refuses NaN/Infinity tokens (Python accepts them by default)."""
    try:
        return json.loads(payload, parse_constant=_reject_constant)
    except _NonFiniteConstantError as exc:
        raise _Reject("non_finite", f"JSON constant {exc.args[0]} is not a finite number") from None
    except (ValueError, RecursionError) as exc:  # JSONDecodeError, UnicodeDecodeError, int limit
        raise _Reject("malformed_json", f"not valid JSON: {str(exc)[:200]}") from None


def _number(raw: object, what: str) -> float:
    if isinstance(raw, bool) or not isinstance(raw, int | float):
        raise _Reject("wrong_type", f"{what} must be a JSON number, got {type(raw).__name__}")
    try:
        x = float(raw)
    except OverflowError:
        raise _Reject("non_finite", f"{what} {raw!r} overflows a float") from None
    if not math.isfinite(x):
        raise _Reject("non_finite", f"{what} {raw!r} is not finite")
    return x


def parse_timestamp(raw: object) -> float:
    """Decode a payload timestamp to seconds since the Unix epoch (UTC).

    Parameters
    ----------
    raw : str or int or float
        ISO 8601 text (naive = UTC) or epoch seconds, or epoch milliseconds when
        ``abs(raw) >= 1e11``.

    Returns
    -------
    float
        Epoch seconds [s].

    Raises
    ------
    ValueError
        Not a timestamp (message says why).

    Examples
    --------
    >>> parse_timestamp("2026-12-01T10:00:00Z")
    1796119200.0
    >>> parse_timestamp(1796119200123)
    1796119200.123
    """
    try:
        return _timestamp(raw)
    except _Reject as exc:
        raise ValueError(exc.detail) from None


def _timestamp(raw: object) -> float:
    if isinstance(raw, str):
        if len(raw) > 64:
            raise _Reject("wrong_type", "timestamp text longer than 64 characters")
        try:
            dt = datetime.fromisoformat(raw.strip())
        except ValueError:
            raise _Reject("wrong_type", f"timestamp {raw[:64]!r} is not ISO 8601") from None
        if dt.tzinfo is None:
            dt = dt.replace(tzinfo=UTC)
        try:
            return dt.timestamp()
        except (OverflowError, OSError, ValueError):
            raise _Reject("wrong_type", f"timestamp {raw[:64]!r} out of range") from None
    x = _number(raw, "timestamp")
    return x / 1000.0 if abs(x) >= MS_THRESHOLD else x


def parse_quality(raw: object) -> str:
    """Map a payload quality to ``"good"``, ``"uncertain"`` or ``"bad"``.

    Parameters
    ----------
    raw : str or int or None
        ``"good"``/``"uncertain"``/``"bad"`` (any case), or an OPC-style quality code 0..255
        (≥ 192 good, 64..191 uncertain, < 64 bad), or None (good).

    Raises
    ------
    ValueError
        Anything else.

    Examples
    --------
    >>> parse_quality(192), parse_quality(100), parse_quality("BAD")
    ('good', 'uncertain', 'bad')
    """
    try:
        return _quality(raw)
    except _Reject as exc:
        raise ValueError(exc.detail) from None


def _quality(raw: object) -> str:
    if raw is None:
        return "good"
    if isinstance(raw, str):
        q = raw.strip().lower()
        if q in ("good", "uncertain", "bad"):
            return q
        raise _Reject("wrong_type", f"quality {raw[:32]!r} is not good/uncertain/bad")
    if isinstance(raw, int) and not isinstance(raw, bool):
        if not 0 <= raw <= 255:
            raise _Reject("wrong_type", f"quality code {raw} outside 0..255")
        if raw >= 192:
            return "good"
        return "uncertain" if raw >= 64 else "bad"
    raise _Reject(
        "wrong_type", f"quality must be text or an integer code, got {type(raw).__name__}"
    )


def _si_unit_of(tag: TagLike) -> str | None:
    """The SI unit a tag converts to, when the tag tells (config converter's ``target``)."""
    try:
        conv = getattr(tag, "converter", None)
    except RuntimeError:  # a TagConfig not compiled by load_plant
        conv = None
    v = getattr(conv, "target", None)
    if isinstance(v, str):
        return v
    name = tag.measurement
    if name.endswith("_temperature"):
        return "K"
    if name.endswith("_pressure"):
        return "Pa"
    if name.endswith("_flow") or name.endswith("_mass_flow"):
        return "kg/s"
    return None


def _measurement_specs(unit: Any) -> dict[str, Any]:
    """Measurement FieldSpecs of a unit's type, by name (empty when not resolvable)."""
    try:
        ut = unit.unit_type_impl
    except (RuntimeError, AttributeError):
        return {}
    return {f.name: f for f in getattr(ut, "measurements", ())}


def _outside_schema(route: TagRoute, x: float) -> str | None:
    if not route.phys_low <= x <= route.phys_high:
        return (
            f"{x:.6g} {route.si_unit or 'SI'} outside the physically possible range "
            f"[{route.phys_low:g}, {route.phys_high:g}] of {route.measurement}"
        )
    return None


def _nonphysical(route: TagRoute, x: float) -> str | None:
    si_unit = route.si_unit
    if si_unit == "K" and x <= 0.0:
        return f"absolute temperature {x:.6g} K is not above 0 K"
    if si_unit == "Pa" and x <= 0.0:
        return f"absolute pressure {x:.6g} Pa is not above 0 Pa"
    if si_unit in ("kg/s", "m^3/s", "m**3/s") and x < 0.0:
        return f"flow {x:.6g} {si_unit} is negative"
    return None


class Decoder:
    """Decode and validate messages for a plant's tag map.

    Parameters
    ----------
    routes : iterable of TagRoute
        Every tag of every unit (see :meth:`from_plant`).
    limits : DecoderLimits
        Payload size, timestamp window and quarantine truncation.
    baro_measurement : str
        Barometric reference [Pa] of gauge tags that do not name one themselves (tags of
        ``daemon.config`` do, via ``baro_reference``; None there means a fixed ``baro_pa``).
        The latest accepted value of a reference measurement is held per unit (no age limit;
        ambient pressure moves slowly) and a gauge value seen before any reference is
        quarantined as ``conversion_error``.

    Raises
    ------
    DecoderConfigError
        A topic mixes a key-less tag with keyed tags, two tags share a topic without keys,
        a key is reserved or repeated on a topic.
    """

    def __init__(
        self,
        routes: Iterable[TagRoute],
        limits: DecoderLimits | None = None,
        *,
        baro_measurement: str = DEFAULT_BARO_MEASUREMENT,
    ) -> None:
        self.limits = limits if limits is not None else DecoderLimits()
        self.baro_measurement = baro_measurement
        self._single: dict[str, TagRoute] = {}
        self._keyed: dict[str, dict[str, TagRoute]] = {}
        by_topic: dict[str, list[TagRoute]] = {}
        for r in routes:
            by_topic.setdefault(r.tag.topic, []).append(r)
        for topic, rs in by_topic.items():
            keys = [r.tag.key for r in rs]
            if all(k == "" for k in keys):
                if len(rs) > 1:
                    raise DecoderConfigError(
                        f"topic {topic!r} carries {len(rs)} tags without a key; give each a key"
                    )
                self._single[topic] = rs[0]
                continue
            if any(k == "" for k in keys):
                raise DecoderConfigError(
                    f"topic {topic!r} mixes a tag without key and tags with keys; give every "
                    "tag on it a key"
                )
            table: dict[str, TagRoute] = {}
            for r in rs:
                if r.tag.key in META_KEYS:
                    raise DecoderConfigError(
                        f"key {r.tag.key!r} on topic {topic!r} is reserved ({sorted(META_KEYS)})"
                    )
                if r.tag.key in table:
                    raise DecoderConfigError(f"key {r.tag.key!r} repeated on topic {topic!r}")
                table[r.tag.key] = r
            self._keyed[topic] = table
        # measurements serving as barometric reference, per unit
        self._baro_sources: set[tuple[str, str]] = set()
        for rs in by_topic.values():
            for r in rs:
                ref = self._baro_ref(r.tag)
                if ref is not None:
                    self._baro_sources.add((r.unit, ref))
        for topic, table in self._keyed.items():
            # barometric references first, so gauge tags of the same message can use them
            self._keyed[topic] = dict(
                sorted(
                    table.items(),
                    key=lambda kv: (kv[1].unit, kv[1].measurement) not in self._baro_sources,
                )
            )
        self._baro: dict[tuple[str, str], float] = {}

    def _baro_ref(self, tag: TagLike) -> str | None:
        """Measurement giving a tag's barometric reference (config's ``baro_reference``)."""
        if hasattr(tag, "baro_reference"):
            ref = tag.baro_reference
            return ref if isinstance(ref, str) else None
        return self.baro_measurement

    @classmethod
    def from_plant(cls, plant: Any, limits: DecoderLimits | None = None) -> Decoder:
        """Build a decoder from a ``daemon.config.PlantConfig`` (units → tags).

        ``limits`` defaults to the plant's ``[daemon]`` values when present.
        """
        routes: list[TagRoute] = []
        for name, unit in plant.units.items():
            specs = _measurement_specs(unit)
            for tag in unit.tags:
                spec = specs.get(tag.measurement)
                routes.append(
                    TagRoute(
                        unit=name,
                        tag=tag,
                        si_unit=_si_unit_of(tag) if spec is None else spec.unit,
                        phys_low=-math.inf if spec is None else float(spec.low),
                        phys_high=math.inf if spec is None else float(spec.high),
                    )
                )
        if limits is None:
            d = getattr(plant, "daemon", None)
            limits = DecoderLimits(
                max_payload_bytes=int(getattr(d, "max_payload_bytes", 65536)),
                future_tolerance_s=float(getattr(d, "future_tolerance_s", 300.0)),
                past_tolerance_s=float(getattr(d, "past_tolerance_s", 86400.0)),
            )
        return cls(routes, limits)

    # -- introspection -------------------------------------------------------------------

    @property
    def topics(self) -> tuple[str, ...]:
        """Every configured topic (exact names, no wildcards)."""
        return tuple(sorted({*self._single, *self._keyed}))

    def unit_of(self, topic: str) -> str | None:
        """Unit name a topic belongs to, or None for an unknown topic."""
        if topic in self._single:
            return self._single[topic].unit
        table = self._keyed.get(topic)
        if table:
            return next(iter(table.values())).unit
        return None

    def routes(self) -> list[TagRoute]:
        """All tag routes."""
        out = list(self._single.values())
        for table in self._keyed.values():
            out.extend(table.values())
        return out

    # -- decoding ------------------------------------------------------------------------

    def decode(self, topic: str, payload: bytes, received_ts: float) -> DecodeResult:
        """Decode one message.

        Parameters
        ----------
        topic : str
            Topic the message arrived on.
        payload : bytes
            Raw payload.
        received_ts : float
            Receive time [s since the Unix epoch, UTC].

        Returns
        -------
        DecodeResult
            Readings and quarantined items; never raises for any payload.
        """
        unit = self.unit_of(topic)
        single = self._single.get(topic)
        lim = self.limits
        msg = _Msg(topic, payload, received_ts, unit, payload[: lim.quarantine_payload_limit])
        measurement = single.measurement if single is not None else None
        if len(payload) > lim.max_payload_bytes:
            return self._whole(
                msg,
                "oversized_payload",
                f"{len(payload)} bytes > max_payload_bytes {lim.max_payload_bytes}",
                measurement,
            )
        if unit is None:
            return self._whole(msg, "unknown_topic", "topic not in the tag map")
        try:
            doc = _loads(payload)
        except _Reject as exc:
            return self._whole(msg, exc.reason, exc.detail, measurement)
        if single is not None:
            return self._decode_single(msg, single, doc)
        return self._decode_object(msg, self._keyed[topic], doc)

    @staticmethod
    def _whole(msg: _Msg, reason: str, detail: str, measurement: str | None = None) -> DecodeResult:
        q = Quarantined(
            received_ts=msg.received_ts,
            topic=msg.topic,
            payload=msg.clipped,
            reason=reason,
            detail=detail,
            unit=msg.unit,
            measurement=measurement,
        )
        return DecodeResult(topic=msg.topic, received=1, readings=(), quarantined=(q,))

    def _decode_single(self, msg: _Msg, route: TagRoute, doc: Any) -> DecodeResult:
        seq: int | None = None
        if isinstance(doc, dict):
            seq = _seq(doc.get("seq"))
            if "value" not in doc:
                return self._whole(
                    msg, "wrong_type", "JSON object without a 'value' field", route.measurement
                )
            item = self._item(msg, route, doc["value"], doc.get("ts"), doc.get("quality"))
        else:
            item = self._item(msg, route, doc, None, None)
        if isinstance(item, Reading):
            return DecodeResult(msg.topic, 1, (item,), (), seq)
        return DecodeResult(msg.topic, 1, (), (item,), seq)

    def _decode_object(self, msg: _Msg, table: Mapping[str, TagRoute], doc: Any) -> DecodeResult:
        if not isinstance(doc, dict):
            return self._whole(
                msg, "wrong_type", f"unit topic expects a JSON object, got {type(doc).__name__}"
            )
        seq = _seq(doc.get("seq"))
        if "values" in doc:
            values = doc["values"]
            if not isinstance(values, dict):
                return self._whole(
                    msg, "wrong_type", f"'values' must be an object, got {type(values).__name__}"
                )
        else:
            values = {k: v for k, v in doc.items() if k not in META_KEYS}
        ts_raw = doc.get("ts")
        q_raw = doc.get("quality")
        readings: list[Reading] = []
        quarantined: list[Quarantined] = []
        # configured keys first (barometric reference first of all), then unknown ones
        ordered = [k for k in table if k in values] + [k for k in values if k not in table]
        for key in ordered:
            raw = values[key]
            route = table.get(key)
            if route is None:
                quarantined.append(
                    Quarantined(
                        received_ts=msg.received_ts,
                        topic=msg.topic,
                        payload=msg.clipped,
                        reason="unknown_key",
                        detail=f"key {str(key)[:64]!r} is not in the tag map of {msg.topic!r}",
                        unit=msg.unit,
                    )
                )
                continue
            item_ts, item_q = ts_raw, q_raw
            if isinstance(raw, dict):
                item_ts = raw.get("ts", ts_raw)
                item_q = raw.get("quality", q_raw)
                raw = raw.get("value")
            item = self._item(msg, route, raw, item_ts, item_q, key=key)
            if isinstance(item, Reading):
                readings.append(item)
            else:
                quarantined.append(item)
        return DecodeResult(msg.topic, len(values), tuple(readings), tuple(quarantined), seq)

    def _item(
        self,
        msg: _Msg,
        route: TagRoute,
        raw: object,
        ts_raw: object,
        q_raw: object,
        *,
        key: str = "",
    ) -> Reading | Quarantined:
        source_ts: float | None = None
        received_ts = msg.received_ts
        where = f"{key}: " if key else ""
        tag = route.tag
        try:
            x = _number(raw, "value")
            source_ts = received_ts if ts_raw is None else _timestamp(ts_raw)
            lim = self.limits
            if source_ts > received_ts + lim.future_tolerance_s:
                raise _Reject(
                    "future_timestamp",
                    f"source time {source_ts - received_ts:.0f} s ahead of receive time "
                    f"(tolerance {lim.future_tolerance_s:g} s)",
                )
            if source_ts < received_ts - lim.past_tolerance_s:
                raise _Reject(
                    "past_timestamp",
                    f"source time {received_ts - source_ts:.0f} s behind receive time "
                    f"(tolerance {lim.past_tolerance_s:g} s)",
                )
            quality = _quality(q_raw)
            if quality == "bad":
                raise _Reject("bad_quality", f"source quality {q_raw!r} is bad")
            try:
                ref = self._baro_ref(tag)
                baro = None if ref is None else self._baro.get((route.unit, ref))
                si = float(tag.to_si(x, baro_pa=baro))
            except (ValueError, TypeError, ArithmeticError) as exc:
                raise _Reject("conversion_error", f"{tag.uom}: {str(exc)[:200]}") from None
            if not math.isfinite(si):
                raise _Reject("conversion_error", f"{x!r} {tag.uom} gives a non-finite SI value")
            why = _nonphysical(route, si)
            if why is not None:
                raise _Reject("nonphysical", f"{x!r} {tag.uom}: {why}")
            if not tag.low <= x <= tag.high:
                raise _Reject(
                    "out_of_range",
                    f"{x!r} {tag.uom} outside the plausible range [{tag.low:g}, {tag.high:g}]",
                )
            why = _outside_schema(route, si)
            if why is not None:  # only when the tag range is wider than the schema allows
                raise _Reject("nonphysical", f"{x!r} {tag.uom}: {why}")
        except _Reject as exc:
            return Quarantined(
                received_ts=received_ts,
                topic=msg.topic,
                payload=msg.clipped,
                reason=exc.reason,
                detail=where + exc.detail,
                unit=route.unit,
                measurement=route.measurement,
                source_ts=source_ts,
            )
        if (route.unit, route.measurement) in self._baro_sources:
            self._baro[(route.unit, route.measurement)] = si
        return Reading(
            unit=route.unit,
            measurement=route.measurement,
            value=si,
            source_ts=source_ts,
            received_ts=received_ts,
            quality=quality,
            topic=msg.topic,
            raw_value=raw,
            raw_uom=tag.uom,
        )


@dataclass(frozen=True, slots=True)
class _Msg:
    topic: str
    payload: bytes
    received_ts: float
    unit: str | None
    clipped: bytes


def _seq(raw: object) -> int | None:
    if isinstance(raw, int) and not isinstance(raw, bool) and 0 <= raw < 2**63:
        return raw
    return None


@dataclass
class SequenceTracker:
    """Detect gaps in per-stream sequence numbers (``seq`` field).

    A stream is a topic.  Mosquitto drops messages for an offline client beyond
    ``max_queued_messages`` without telling anyone; a jump in ``seq`` is how we notice.

    Rules: ``seq == last + 1`` is normal; ``seq > last + 1`` adds ``seq − last − 1`` to
    ``missing`` (and 1 to ``gaps``); ``seq == last`` is a repeat (QoS-1 redelivery), counted in
    ``repeats``; ``seq < last`` is a restart or a reordering, counted in ``regressions`` and
    taken as the new baseline.
    """

    last: dict[str, int] = field(default_factory=dict)
    gaps: int = 0
    missing: int = 0
    repeats: int = 0
    regressions: int = 0

    def observe(self, stream: str, seq: int | None) -> int:
        """Record ``seq`` for ``stream``; return the number of messages found missing (≥ 0)."""
        if seq is None:
            return 0
        prev = self.last.get(stream)
        self.last[stream] = seq
        if prev is None or seq == prev + 1:
            return 0
        if seq == prev:
            self.repeats += 1
            self.last[stream] = prev
            return 0
        if seq < prev:
            self.regressions += 1
            return 0
        n = seq - prev - 1
        self.gaps += 1
        self.missing += n
        return n


def decode_many(
    decoder: Decoder, messages: Sequence[tuple[str, bytes, float]]
) -> list[DecodeResult]:
    """Decode several ``(topic, payload, received_ts)`` messages in order."""
    return [decoder.decode(t, p, ts) for t, p, ts in messages]

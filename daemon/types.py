"""Core value types that flow through the live path: feeds → assembly → compute → sinks.

``Reading``
    one accepted value of one tag of one unit, already converted to SI at the boundary.
``Quarantined``
    one rejected input (a whole message, or one value of a multi-value message), kept with
    its reason code from :data:`QUARANTINE_REASONS`.
``Snapshot``
    a unit's canonical measurements at one tick, with per-measurement quality bits and ages.
``UnstorableError``
    raised by a commit when the database is up but refused the data of a batch (a value it
    cannot hold): the feed then isolates the offending message and quarantines it as
    ``unstorable`` instead of treating the database as down.

These are plain frozen dataclasses with no behaviour, so every layer (and every test) can build
them directly.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

__all__ = [
    "QUALITY_VALUES",
    "QUARANTINE_REASONS",
    "Quarantined",
    "Reading",
    "Snapshot",
    "UnstorableError",
]

#: The fixed, bounded set of quarantine reason codes.  They are also the values of the
#: ``reason`` label of the rejected-readings counter, so the label's cardinality is bounded.
QUARANTINE_REASONS: Final[frozenset[str]] = frozenset(
    {
        "malformed_json",
        "non_finite",
        "wrong_type",
        "unknown_topic",
        "unknown_key",
        "out_of_range",
        "nonphysical",
        "future_timestamp",
        "past_timestamp",
        "oversized_payload",
        "bad_quality",
        "duplicate",
        "conversion_error",
        # binary feeds (Sparkplug B, OPC UA)
        "malformed_protobuf",
        "no_birth",
        "unknown_alias",
        "unsupported_datatype",
        "null_value",
        # a message the database refused to store (isolated by the feed)
        "unstorable",
    }
)


class UnstorableError(Exception):
    """The database answered but refused (part of) a batch: a value it cannot hold.

    Not a database outage: the offending message is quarantined as ``unstorable`` and the
    rest of the batch is committed and acknowledged.  A commit that fails because the
    database is unreachable raises the database error itself, never this.
    """


#: Quality strings a :class:`Reading` may carry.
QUALITY_VALUES: Final[frozenset[str]] = frozenset({"good", "uncertain", "bad"})


@dataclass(frozen=True, slots=True)
class Reading:
    """One value of one tag of one unit.

    Attributes
    ----------
    unit : str
        Unit name from the plant file (e.g. ``"KR-GT1"``).
    measurement : str
        Canonical measurement name (glossary name, e.g. ``"ambient_temperature"``).
    value : float
        Value in SI units [K, Pa, kg/s, W, 1], converted from ``raw_uom`` at the boundary.
    source_ts : float
        Source timestamp [s since the Unix epoch, UTC] from the payload, else the receive time.
    received_ts : float
        Time the message was received [s since the Unix epoch, UTC].
    quality : str
        ``"good"``, ``"uncertain"`` or ``"bad"``.
    topic : str
        MQTT topic (or other source address) the value came from.
    raw_value : object
        The value exactly as decoded from the payload, before unit conversion.
    raw_uom : str
        The tag's unit of measure as written in the plant file.
    """

    unit: str
    measurement: str
    value: float
    source_ts: float
    received_ts: float
    quality: str
    topic: str
    raw_value: object
    raw_uom: str


@dataclass(frozen=True, slots=True)
class Quarantined:
    """A rejected input, stored with its reason.

    Attributes
    ----------
    received_ts : float
        Receive time [s since the Unix epoch, UTC].
    topic : str
        Source topic.
    payload : bytes
        The raw payload, truncated to the decoder's ``quarantine_payload_limit``.
    reason : str
        One of :data:`QUARANTINE_REASONS`.
    detail : str
        Human-readable explanation (which key, which value, which limit).
    unit : str or None
        The unit the input belonged to, when the topic is known.
    measurement : str or None
        The measurement the value belonged to, when known (lets the assembly mark the
        measurement bad instead of silently holding an older good value).
    source_ts : float or None
        Source timestamp [s since the Unix epoch, UTC] when it could be decoded.
    """

    received_ts: float
    topic: str
    payload: bytes
    reason: str
    detail: str
    unit: str | None
    measurement: str | None = None
    source_ts: float | None = None

    def __post_init__(self) -> None:
        if self.reason not in QUARANTINE_REASONS:
            msg = (
                f"unknown quarantine reason {self.reason!r}; "
                f"use one of {sorted(QUARANTINE_REASONS)}"
            )
            raise ValueError(msg)


@dataclass(frozen=True)
class Snapshot:
    """A unit's canonical measurements at one tick.

    Attributes
    ----------
    unit : str
        Unit name.
    unit_type : str
        Unit type name (e.g. ``"gas_turbine"``).
    ts : float
        Tick time [s since the Unix epoch, UTC], a multiple of the tick period.
    values : dict of str to float
        Measurement values [SI]; NaN where missing, stale or bad.
    quality : dict of str to int
        :class:`models.status.Reason` bits per measurement (``INPUT_STALE``,
        ``INPUT_BAD_QUALITY``, ``INPUT_MISSING``, ``INPUT_NONPHYSICAL``, ``INPUT_STUCK``,
        ``INPUT_DISAGREE``); 0 when usable, or the warning bit ``CLOCK_AHEAD`` alone (usable,
        but the source clock of the held value was ahead of the receive clock).
    age_s : dict of str to float
        Age of the held value at ``ts`` [s]; NaN when no value was ever received.
    steady : bool or None
        Steady-state flag, ``None`` while the steady-state test is not yet decided.
    r_statistic : float or None
        The R-statistic of the steady-state signal at this tick, if computed.
    """

    unit: str
    unit_type: str
    ts: float
    values: dict[str, float]
    quality: dict[str, int]
    age_s: dict[str, float]
    steady: bool | None
    r_statistic: float | None

"""Sparkplug B (Eclipse Sparkplug 3.0.0) as a source of readings: pure decoding, no I/O.

* :mod:`~daemon.feeds.sparkplug.sparkplug_b_pb2` — message classes generated from our
  ``sparkplug_b.proto`` (``tools/gen_sparkplug_pb2.py``).
* :mod:`~daemon.feeds.sparkplug.topic` — topic names ``spBv1.0/<group>/<type>/<node>[/<device>]``.
* :mod:`~daemon.feeds.sparkplug.payload` — metric values by datatype, the Quality property,
  the Rebirth Request payload.
* :mod:`~daemon.feeds.sparkplug.address` — :class:`MetricAddress` (a plant-file tag's address)
  and :class:`SparkplugTagMap`.
* :mod:`~daemon.feeds.sparkplug.decoder` — :class:`SparkplugDecoder`, the per-edge-node state
  machine (births, aliases, seq, bdSeq) producing readings, quarantined items and events.
* :mod:`~daemon.feeds.sparkplug.primary_host` — the primary host's STATE messages and their order.

See ``docs/feeds.md`` ("Sparkplug B") for what is guaranteed.
"""

from daemon.feeds.sparkplug.address import MetricAddress, SparkplugTagMap
from daemon.feeds.sparkplug.decoder import (
    DeviceBirth,
    InputsStale,
    NodeBirth,
    NodeDeath,
    RebirthRequest,
    SequenceGap,
    SparkplugCounters,
    SparkplugDecoder,
    SparkplugEvent,
    SparkplugResult,
)
from daemon.feeds.sparkplug.primary_host import HostSession, HostState, parse_state, state_payload
from daemon.feeds.sparkplug.topic import SparkplugTopic, TopicError, parse_topic

__all__ = [
    "DeviceBirth",
    "HostSession",
    "HostState",
    "InputsStale",
    "MetricAddress",
    "NodeBirth",
    "NodeDeath",
    "RebirthRequest",
    "SequenceGap",
    "SparkplugCounters",
    "SparkplugDecoder",
    "SparkplugEvent",
    "SparkplugResult",
    "SparkplugTagMap",
    "SparkplugTopic",
    "TopicError",
    "parse_state",
    "parse_topic",
    "state_payload",
]

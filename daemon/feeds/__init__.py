"""Feeds: sources of plant readings.

* :mod:`daemon.feeds.decode` — pure payload decoding and validation (no I/O).
* :mod:`daemon.feeds.mqtt` — the MQTT feed (QoS 1, persistent session, ack after commit).

See ``docs/feeds.md`` for payload forms, reason codes and the runtime integration.
"""

from daemon.feeds.decode import (
    Batch,
    Decoder,
    DecoderConfigError,
    DecodeResult,
    DecoderLimits,
    SequenceTracker,
    TagRoute,
    parse_quality,
    parse_timestamp,
)

__all__ = [
    "Batch",
    "DecodeResult",
    "Decoder",
    "DecoderConfigError",
    "DecoderLimits",
    "SequenceTracker",
    "TagRoute",
    "parse_quality",
    "parse_timestamp",
]

"""Checks for values that arrive already typed (Sparkplug B metrics, OPC UA data changes).

The JSON decoder (:mod:`daemon.feeds.decode`) owns the per-value checks: number type → finite →
timestamp window → quality → conversion to SI → physically possible → plausible tag range →
the unit type's range, each failure with its reason code.  Binary feeds decode their own
framing (protobuf, OPC UA binary) and then hand each value to :class:`ValueChecker`, which runs
exactly those checks, so a value is accepted or refused the same way whichever feed brought
it, and the barometric reference of gauge tags works the same way.

Keys are whatever the feed addresses a tag by (a Sparkplug metric address, an OPC UA NodeId);
the checker never looks at a tag's MQTT ``topic``.

The checks are reached through the decoder's per-value routine (``Decoder._item``): this module
is the only place outside ``decode.py`` that does so, so when the feed seam gives the decoder a
public entry point for typed values, only :meth:`ValueChecker.check` changes.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Hashable, Iterable
from typing import Any

from daemon.feeds import decode as _decode
from daemon.feeds.decode import Decoder, DecoderLimits, TagLike, TagRoute
from daemon.types import Quarantined, Reading

__all__ = ["ValueChecker"]


class _KeyedTag:
    """A tag seen through a synthetic, unique topic (everything else is the real tag's)."""

    __slots__ = ("_inner", "key", "topic")

    def __init__(self, inner: TagLike, topic: str) -> None:
        self._inner = inner
        self.topic = topic
        self.key = ""

    def __getattr__(self, name: str) -> Any:  # measurement, uom, low, high, to_si, baro_...
        return getattr(self._inner, name)


class ValueChecker:
    """Run the decoder's value checks on typed values of configured tags.

    Parameters
    ----------
    routes : iterable of (key, TagRoute)
        The tags this feed serves, each with the feed's own address of it (any hashable).
    limits : DecoderLimits, optional
        Timestamp window and quarantine truncation (the plant's ``[daemon]`` values).

    Raises
    ------
    ValueError
        A key is given twice.

    Examples
    --------
    ::

        checker = ValueChecker([(address, route), ...], limits)
        item = checker.check(address, 14.2, source_ts=ts, quality="good",
                             topic="spBv1.0/KR/DDATA/gt1-edge/GT1", payload=raw,
                             received_ts=now)
    """

    def __init__(
        self, routes: Iterable[tuple[Hashable, TagRoute]], limits: DecoderLimits | None = None
    ) -> None:
        self._routes: dict[Hashable, TagRoute] = {}
        wrapped: list[TagRoute] = []
        for i, (key, route) in enumerate(routes):
            if key in self._routes:
                raise ValueError(f"tag address {key!r} is mapped twice")
            inner = dataclasses.replace(route, tag=_KeyedTag(route.tag, f"\x00typed/{i}"))
            self._routes[key] = inner
            wrapped.append(inner)
        self._decoder = Decoder(wrapped, limits)
        self.limits = self._decoder.limits

    def __contains__(self, key: object) -> bool:
        return key in self._routes

    def route(self, key: Hashable) -> TagRoute | None:
        """The route of a key (its ``tag`` is the real tag seen through a wrapper), or None."""
        return self._routes.get(key)

    def keys(self) -> list[Hashable]:
        """Every configured key."""
        return list(self._routes)

    def check(
        self,
        key: Hashable,
        raw: object,
        *,
        source_ts: float | None,
        quality: str,
        topic: str,
        payload: bytes,
        received_ts: float,
        quality_detail: str | None = None,
    ) -> Reading | Quarantined:
        """Check one value of a configured tag.

        Parameters
        ----------
        key : hashable
            The tag's address (must be configured; see ``in``).
        raw : int or float
            The value in the tag's own unit (booleans and text are refused as ``wrong_type``).
        source_ts : float or None
            Source timestamp [s since the Unix epoch, UTC]; None takes the receive time.
        quality : str
            ``"good"``, ``"uncertain"`` or ``"bad"`` (bad is quarantined as ``bad_quality``).
        topic : str
            Source address recorded in the reading / quarantined item.
        payload : bytes
            Raw message, kept (truncated) with a quarantined item.
        received_ts : float
            Receive time [s since the Unix epoch, UTC].
        quality_detail : str, optional
            What the source said about the quality (e.g. ``"Sparkplug Quality 500 (STALE)"``);
            replaces the generic detail of a ``bad_quality`` item.

        Returns
        -------
        Reading or Quarantined
        """
        route = self._routes[key]
        msg = _decode._Msg(
            topic,
            payload,
            received_ts,
            route.unit,
            payload[: self.limits.quarantine_payload_limit],
        )
        item = self._decoder._item(msg, route, raw, source_ts, quality)
        if (
            quality_detail is not None
            and isinstance(item, Quarantined)
            and item.reason == "bad_quality"
        ):
            return dataclasses.replace(item, detail=quality_detail)
        return item

    def refuse(
        self,
        key: Hashable | None,
        reason: str,
        detail: str,
        *,
        topic: str,
        payload: bytes,
        received_ts: float,
        unit: str | None = None,
        source_ts: float | None = None,
    ) -> Quarantined:
        """A quarantined item for a value refused before the value checks (framing, datatype,
        null, unknown alias ...), with the unit and measurement of ``key`` when configured."""
        route = self._routes.get(key) if key is not None else None
        return Quarantined(
            received_ts=received_ts,
            topic=topic,
            payload=payload[: self.limits.quarantine_payload_limit],
            reason=reason,
            detail=detail,
            unit=route.unit if route is not None else unit,
            measurement=route.measurement if route is not None else None,
            source_ts=source_ts,
        )

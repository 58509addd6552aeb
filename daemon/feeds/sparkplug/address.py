"""Where a plant-file tag lives in a Sparkplug B system: group / edge node / device / metric.

A :class:`MetricAddress` is what a tag of a Sparkplug feed names instead of an MQTT topic and
key.  Written in the plant file either as a table::

    sparkplug = { group = "KR", edge_node = "gt1-edge", device = "GT1", metric = "CDT" }

or as one string ``"KR/gt1-edge/GT1#CDT"`` (``group/edge node[/device]#metric``; the
``spBv1.0/`` prefix is optional).  The ``#`` cannot occur in a group, edge node or device id
(it is reserved in topics), so the first ``#`` always ends the topic part, whatever the
metric name holds (metric names are ``/``-separated folder paths and may contain ``#``).

:class:`SparkplugTagMap` is the lookup address → (unit, measurement, tag), the counterpart of
the MQTT decoder's topic/key table; it also gives the subscriptions a host needs.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from daemon.feeds.decode import DecoderConfigError, TagRoute
from daemon.feeds.sparkplug.topic import NAMESPACE, TopicError, check_id

__all__ = ["AddressKey", "MetricAddress", "SparkplugTagMap"]

#: ``(group, edge node, device or "", metric name)``: the hashable form used in lookups.
AddressKey = tuple[str, str, str, str]


class MetricAddress(BaseModel):
    """A metric of an edge node (``device = None``) or of one of its devices.

    Attributes
    ----------
    group : str
        Sparkplug group id.
    edge_node : str
        Edge node id.
    device : str or None
        Device id; None for a metric of the edge node itself (NBIRTH/NDATA).
    metric : str
        Metric name as in the birth certificate (case-sensitive, ``/`` for folders).

    Examples
    --------
    >>> a = MetricAddress.parse("KR/gt1-edge/GT1#Compressor/Discharge T")
    >>> (a.group, a.edge_node, a.device, a.metric)
    ('KR', 'gt1-edge', 'GT1', 'Compressor/Discharge T')
    >>> str(a)
    'spBv1.0/KR/gt1-edge/GT1#Compressor/Discharge T'
    """

    model_config = ConfigDict(extra="forbid", frozen=True)

    group: str = Field(min_length=1, max_length=256)
    edge_node: str = Field(min_length=1, max_length=256)
    device: str | None = Field(default=None, min_length=1, max_length=256)
    metric: str = Field(min_length=1, max_length=1024)

    @field_validator("group", "edge_node", "device")
    @classmethod
    def _valid_id(cls, v: str | None, info: Any) -> str | None:
        if v is None:
            return v
        try:
            return check_id(v, info.field_name.replace("_", " ") + " id")
        except TopicError as exc:
            raise ValueError(f"{exc}; group, edge node and device ids cannot hold + / #") from None

    @model_validator(mode="before")
    @classmethod
    def _from_string(cls, data: Any) -> Any:
        if isinstance(data, str):
            return _split(data)
        return data

    @classmethod
    def parse(cls, text: str) -> MetricAddress:
        """Parse ``[spBv1.0/]group/edge node[/device]#metric`` (raises ``ValueError``)."""
        return cls.model_validate(_split(text))

    @property
    def key(self) -> AddressKey:
        """The lookup key ``(group, edge node, device or "", metric)``."""
        return (self.group, self.edge_node, self.device or "", self.metric)

    def __str__(self) -> str:
        dev = f"/{self.device}" if self.device is not None else ""
        return f"{NAMESPACE}/{self.group}/{self.edge_node}{dev}#{self.metric}"


def _split(text: str) -> dict[str, Any]:
    head, sep, metric = text.partition("#")
    if not sep:
        raise ValueError(
            f"Sparkplug address {text[:120]!r} has no '#': write group/edge node[/device]#metric"
        )
    levels = head.split("/")
    if levels and levels[0] == NAMESPACE:
        levels = levels[1:]
    if len(levels) not in (2, 3):
        raise ValueError(
            f"Sparkplug address {text[:120]!r}: expected group/edge node[/device] before '#', "
            f"got {len(levels)} level(s)"
        )
    out: dict[str, Any] = {"group": levels[0], "edge_node": levels[1], "metric": metric}
    if len(levels) == 3:
        out["device"] = levels[2]
    return out


class SparkplugTagMap:
    """The tags a Sparkplug feed serves, by metric address.

    Parameters
    ----------
    routes : iterable of (MetricAddress, TagRoute)
        Every tag with its address (the route carries unit, measurement, tag and the
        physical range, exactly as for the MQTT decoder).

    Raises
    ------
    DecoderConfigError
        The same address is mapped twice.
    """

    def __init__(self, routes: Iterable[tuple[MetricAddress, TagRoute]]) -> None:
        self._routes: dict[AddressKey, TagRoute] = {}
        self._addresses: dict[AddressKey, MetricAddress] = {}
        self._node_units: dict[tuple[str, str], set[str]] = {}
        for address, route in routes:
            key = address.key
            if key in self._routes:
                raise DecoderConfigError(f"Sparkplug address {address} is mapped twice")
            self._routes[key] = route
            self._addresses[key] = address
            self._node_units.setdefault((address.group, address.edge_node), set()).add(route.unit)

    def __len__(self) -> int:
        return len(self._routes)

    def __contains__(self, key: object) -> bool:
        return key in self._routes

    def __iter__(self) -> Iterator[tuple[MetricAddress, TagRoute]]:
        for key, route in self._routes.items():
            yield self._addresses[key], route

    def get(self, key: AddressKey) -> TagRoute | None:
        """The route of an address key, or None when the metric is not mapped."""
        return self._routes.get(key)

    @property
    def nodes(self) -> frozenset[tuple[str, str]]:
        """Edge nodes ``(group, edge node)`` with at least one mapped metric."""
        return frozenset(self._node_units)

    def units_of_node(self, group: str, edge_node: str) -> frozenset[str]:
        """Units fed by an edge node."""
        return frozenset(self._node_units.get((group, edge_node), ()))

    def inputs_of(
        self, group: str, edge_node: str, device: str | None, *, whole_node: bool = False
    ) -> tuple[tuple[str, str], ...]:
        """``(unit, measurement)`` of the mapped metrics of a device (``device``), of the edge
        node itself (``device=None``), or of the node and all its devices (``whole_node``)."""
        out: list[tuple[str, str]] = []
        for (g, n, d, _), route in self._routes.items():
            if g != group or n != edge_node:
                continue
            if whole_node or d == (device or ""):
                out.append((route.unit, route.measurement))
        return tuple(sorted(set(out)))

    def subscriptions(self) -> list[str]:
        """Topic filters for the mapped edge nodes: ``spBv1.0/<group>/+/<edge node>/#``
        (every message type of the node and its devices, nothing of other nodes)."""
        return sorted(f"{NAMESPACE}/{g}/+/{n}/#" for g, n in self._node_units)

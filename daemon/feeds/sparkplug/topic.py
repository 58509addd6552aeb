"""Sparkplug B topic names: ``spBv1.0/<group>/<type>/<edge node>[/<device>]`` and
``spBv1.0/STATE/<host id>``.

Rules (Eclipse Sparkplug 3.0.0, chapter 4 "Topics and Messages"):

* the namespace element of Sparkplug B is the string ``spBv1.0``;
* group, edge node and device ids are UTF-8 strings without ``+``, ``/`` or ``#``;
* ``DBIRTH``, ``DDEATH``, ``DDATA`` and ``DCMD`` carry a device id, ``NBIRTH``, ``NDEATH``,
  ``NDATA`` and ``NCMD`` do not;
* a host application's state topic is ``spBv1.0/STATE/<host id>`` (no group).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final, Literal

__all__ = [
    "DEVICE_TYPES",
    "MESSAGE_TYPES",
    "NAMESPACE",
    "NODE_TYPES",
    "MessageType",
    "SparkplugTopic",
    "TopicError",
    "check_id",
    "parse_topic",
]

#: Namespace element of Sparkplug B topics.
NAMESPACE: Final = "spBv1.0"

MessageType = Literal[
    "NBIRTH", "NDEATH", "NDATA", "NCMD", "DBIRTH", "DDEATH", "DDATA", "DCMD", "STATE"
]

#: Message types addressed to or from an edge node (no device id).
NODE_TYPES: Final = frozenset({"NBIRTH", "NDEATH", "NDATA", "NCMD"})
#: Message types addressed to or from a device (with a device id).
DEVICE_TYPES: Final = frozenset({"DBIRTH", "DDEATH", "DDATA", "DCMD"})
#: Every message type.
MESSAGE_TYPES: Final = NODE_TYPES | DEVICE_TYPES | {"STATE"}

_RESERVED = frozenset("+/#")


class TopicError(ValueError):
    """A topic (or an id meant for one) is not a valid Sparkplug B name."""


def check_id(value: str, what: str) -> str:
    """Validate a group / edge node / device / host id; return it unchanged.

    Raises
    ------
    TopicError
        Empty, or contains ``+``, ``/`` or ``#`` (reserved by MQTT and Sparkplug).

    Examples
    --------
    >>> check_id("KR-GT1", "device id")
    'KR-GT1'
    """
    if not value:
        raise TopicError(f"{what} is empty")
    bad = sorted(_RESERVED.intersection(value))
    if bad:
        raise TopicError(f"{what} {value!r} contains {' '.join(bad)} (reserved in topics)")
    return value


@dataclass(frozen=True, slots=True)
class SparkplugTopic:
    """A parsed Sparkplug B topic.

    Attributes
    ----------
    message_type : str
        ``NBIRTH`` ... ``DCMD`` or ``STATE``.
    group : str
        Group id (``""`` for ``STATE``).
    edge_node : str
        Edge node id (``""`` for ``STATE``).
    device : str or None
        Device id for device messages, else None.
    host_id : str or None
        Host application id of a ``STATE`` topic, else None.
    """

    message_type: MessageType
    group: str = ""
    edge_node: str = ""
    device: str | None = None
    host_id: str | None = None

    @property
    def node_key(self) -> tuple[str, str]:
        """``(group, edge node)``: the edge node descriptor, unique in a Sparkplug system."""
        return (self.group, self.edge_node)

    def __str__(self) -> str:
        if self.message_type == "STATE":
            return f"{NAMESPACE}/STATE/{self.host_id}"
        tail = f"/{self.device}" if self.device is not None else ""
        return f"{NAMESPACE}/{self.group}/{self.message_type}/{self.edge_node}{tail}"

    @classmethod
    def node(cls, message_type: MessageType, group: str, edge_node: str) -> SparkplugTopic:
        """An edge-node topic (``NBIRTH``, ``NDEATH``, ``NDATA``, ``NCMD``), ids validated."""
        if message_type not in NODE_TYPES:
            raise TopicError(f"{message_type} is not an edge-node message type")
        return cls(message_type, check_id(group, "group id"), check_id(edge_node, "edge node id"))

    @classmethod
    def device_topic(
        cls, message_type: MessageType, group: str, edge_node: str, device: str
    ) -> SparkplugTopic:
        """A device topic (``DBIRTH``, ``DDEATH``, ``DDATA``, ``DCMD``), ids validated."""
        if message_type not in DEVICE_TYPES:
            raise TopicError(f"{message_type} is not a device message type")
        return cls(
            message_type,
            check_id(group, "group id"),
            check_id(edge_node, "edge node id"),
            check_id(device, "device id"),
        )

    @classmethod
    def state(cls, host_id: str) -> SparkplugTopic:
        """The state topic of a host application."""
        return cls("STATE", host_id=check_id(host_id, "host id"))


def parse_topic(topic: str) -> SparkplugTopic:
    """Parse a Sparkplug B topic.

    Parameters
    ----------
    topic : str
        An MQTT topic name.

    Returns
    -------
    SparkplugTopic

    Raises
    ------
    TopicError
        Not under ``spBv1.0/``, unknown message type, wrong number of levels for the type,
        or an empty level.

    Examples
    --------
    >>> t = parse_topic("spBv1.0/KR/DDATA/gt1-edge/GT1")
    >>> (t.message_type, t.group, t.edge_node, t.device)
    ('DDATA', 'KR', 'gt1-edge', 'GT1')
    >>> parse_topic("spBv1.0/STATE/brayscope-kr").host_id
    'brayscope-kr'
    """
    levels = topic.split("/")
    if levels[0] != NAMESPACE:
        raise TopicError(f"topic {topic[:120]!r} is not in the {NAMESPACE} namespace")
    if len(levels) == 3 and levels[1] == "STATE":
        return SparkplugTopic("STATE", host_id=check_id(levels[2], "host id"))
    if len(levels) < 4:
        raise TopicError(f"topic {topic[:120]!r} has {len(levels)} levels; expected 4 or 5")
    mtype = levels[2]
    if mtype not in MESSAGE_TYPES or mtype == "STATE":
        raise TopicError(f"topic {topic[:120]!r}: unknown message type {mtype[:16]!r}")
    if mtype in NODE_TYPES and len(levels) != 4:
        raise TopicError(f"topic {topic[:120]!r}: {mtype} takes no device id")
    if mtype in DEVICE_TYPES and len(levels) != 5:
        raise TopicError(f"topic {topic[:120]!r}: {mtype} needs a device id")
    names = ("group id", "type", "edge node id", "device id")
    for level, what in zip(levels[1:], names, strict=False):
        if not level:
            raise TopicError(f"topic {topic[:120]!r}: empty {what}")
    device = levels[4] if len(levels) == 5 else None
    return SparkplugTopic(mtype, levels[1], levels[3], device)  # type: ignore[arg-type]

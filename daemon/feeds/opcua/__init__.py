"""OPC UA as a source of readings (asyncua client).

* :mod:`~daemon.feeds.opcua.nodeid` — NodeId text forms for the plant file.
* :mod:`~daemon.feeds.opcua.session` — :class:`OpcUaSession`: security, subscriptions,
  reconnect, HistoryRead of outages; decoded batches as an async iterator.
* :mod:`~daemon.feeds.opcua.browse` — walk a server's address space (``brayscope opcua browse``).

See ``docs/feeds.md`` ("OPC UA") for what is guaranteed and what an outage loses.
"""

from daemon.feeds.opcua.nodeid import NodeIdError, NodeIdSpec, NodeIdText, parse_node_id
from daemon.feeds.opcua.session import (
    Connected,
    ConnectionLost,
    HistoryRecovered,
    MonitoredItemFailed,
    MonitoredTag,
    MonitoredTagSpec,
    OpcUaBatch,
    OpcUaConfigError,
    OpcUaEndpoint,
    OpcUaEvent,
    OpcUaSecurity,
    OpcUaSecurityError,
    OpcUaSession,
    OpcUaStats,
)

__all__ = [
    "Connected",
    "ConnectionLost",
    "HistoryRecovered",
    "MonitoredItemFailed",
    "MonitoredTag",
    "MonitoredTagSpec",
    "NodeIdError",
    "NodeIdSpec",
    "NodeIdText",
    "OpcUaBatch",
    "OpcUaConfigError",
    "OpcUaEndpoint",
    "OpcUaEvent",
    "OpcUaSecurity",
    "OpcUaSecurityError",
    "OpcUaSession",
    "OpcUaStats",
    "parse_node_id",
]

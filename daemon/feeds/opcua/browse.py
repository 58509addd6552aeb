"""Walk an OPC UA server's address space: the nodes a user can put in the plant file.

:func:`browse` follows hierarchical references from a start node (the Objects folder by
default) down to ``depth`` levels and returns one :class:`BrowseRow` per node: NodeId (with
the namespace written as ``nsu=<uri>``, which stays valid when the server renumbers its
namespaces), browse name, node class, data type and, for variables, the current value with
its StatusCode.
"""

from __future__ import annotations

import base64
from dataclasses import dataclass
from typing import Any

from daemon.feeds.opcua.nodeid import parse_node_id
from daemon.feeds.opcua.session import OpcUaEndpoint

__all__ = ["BrowseRow", "browse"]


@dataclass(frozen=True, slots=True)
class BrowseRow:
    """One node found.

    Attributes
    ----------
    depth : int
        Levels below the start node (0 = the start node's children).
    node_id : str
        NodeId text, ``nsu=`` form for namespaces above 0.
    browse_name : str
        ``<namespace index>:<name>``.
    node_class : str
        ``Object``, ``Variable``, ``Method`` ...
    data_type : str
        Data type of a variable (``Double``, ``Float``, ``UInt32`` ...), else ``""``.
    value : str
        Current value of a variable (shortened), else ``""``.
    status : str
        StatusCode name of that value, else ``""``.
    """

    depth: int
    node_id: str
    browse_name: str
    node_class: str
    data_type: str
    value: str
    status: str


def _text(ns_index: int, ident: object, kind: str, namespaces: list[str]) -> str:
    if ns_index == 0:
        ns = ""
    elif ns_index < len(namespaces):
        ns = f"nsu={namespaces[ns_index]};"
    else:
        ns = f"ns={ns_index};"
    if kind == "b" and isinstance(ident, bytes):
        ident = base64.b64encode(ident).decode()
    return f"{ns}{kind}={ident}"


def _node_id_text(nid: Any, namespaces: list[str]) -> str:
    from asyncua import ua

    kinds = {
        ua.NodeIdType.TwoByte: "i",
        ua.NodeIdType.FourByte: "i",
        ua.NodeIdType.Numeric: "i",
        ua.NodeIdType.String: "s",
        ua.NodeIdType.Guid: "g",
        ua.NodeIdType.ByteString: "b",
    }
    return _text(int(nid.NamespaceIndex), nid.Identifier, kinds[nid.NodeIdType], namespaces)


async def browse(
    endpoint: OpcUaEndpoint,
    *,
    start: str | None = None,
    depth: int = 2,
    max_nodes: int = 2000,
    password: str | None = None,
) -> list[BrowseRow]:
    """Browse a server from ``start`` (NodeId text; the Objects folder by default).

    Parameters
    ----------
    endpoint : OpcUaEndpoint
        URL and security (the same settings a feed would use).
    start : str, optional
        NodeId to start from.
    depth : int
        Levels to descend (1 = only the start node's children).
    max_nodes : int
        Stop after this many nodes.
    password : str, optional
        Password for the endpoint's user name (resolved by the caller from env or file).

    Raises
    ------
    NodeIdError
        ``start`` is not a valid NodeId or its namespace is unknown.
    """
    from asyncua import Client, ua

    from daemon.feeds.opcua.session import OpcUaSession

    client = Client(endpoint.url, timeout=endpoint.request_timeout_s)
    await OpcUaSession(endpoint, []).secure_client(client)
    if endpoint.security.username:
        client.set_user(endpoint.security.username)
        if password is not None:
            client.set_password(password)
    await client.connect()
    try:
        namespaces = list(await client.get_namespace_array())
        root = (
            client.get_node(parse_node_id(start).to_ua(namespaces))
            if start
            else client.nodes.objects
        )
        rows: list[BrowseRow] = []

        async def walk(node: Any, level: int) -> None:
            for child in await node.get_children():
                if len(rows) >= max_nodes:
                    return
                cls = await child.read_node_class()
                name = await child.read_browse_name()
                data_type = value = status = ""
                if cls == ua.NodeClass.Variable:
                    try:
                        dt_node = client.get_node(await child.read_data_type())
                        data_type = (await dt_node.read_browse_name()).Name
                        dv = await child.read_data_value(raise_on_bad_status=False)
                        value = repr(dv.Value.Value)[:40] if dv.Value is not None else ""
                        status = dv.StatusCode.name
                    except Exception as exc:  # an unreadable variable is still listed
                        status = type(exc).__name__
                rows.append(
                    BrowseRow(
                        level,
                        _node_id_text(child.nodeid, namespaces),
                        f"{name.NamespaceIndex}:{name.Name}",
                        cls.name,
                        data_type,
                        value,
                        status,
                    )
                )
                if level + 1 < depth and cls == ua.NodeClass.Object:
                    await walk(child, level + 1)

        await walk(root, 0)
        return rows
    finally:
        await client.disconnect()

"""OPC UA NodeIds as written in the plant file: parse, validate, print, resolve.

Text form (OPC 10000-6, section 5.3.1.10 "NodeId" and 5.3.1.11 "ExpandedNodeId")::

    [ns=<index>;|nsu=<namespace uri>;]<type>=<identifier>

with ``i=`` numeric (UInt32), ``s=`` string, ``g=`` GUID, ``b=`` opaque (base64).  Without a
namespace part the namespace is 0.  ``nsu=`` names the namespace by its URI (stable across
server restarts and versions, unlike the index); it is resolved against the server's
namespace array on each connection.  A string identifier runs to the end of the text, so it
may hold ``;`` and ``=``.

Examples: ``i=2258`` (the server's current time), ``ns=2;s=KR-GT1.TT-CD``,
``nsu=urn:kestrel-ridge:gt;s=KR-GT1.TT-CD``, ``ns=3;g=09087e75-8e5e-499b-954f-f2a9603db28a``,
``ns=4;b=S1ItR1Qx``.
"""

from __future__ import annotations

import base64
import binascii
import re
import uuid
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Annotated, Any, Final, Literal

from pydantic import BeforeValidator, PlainSerializer

__all__ = ["NodeIdError", "NodeIdSpec", "NodeIdText", "parse_node_id"]

#: Longest string / opaque identifier accepted [characters / bytes] (OPC 10000-3, 8.2.4
#: recommends servers keep string NodeIds within 4096 characters; from memory).
MAX_IDENTIFIER: Final = 4096
MAX_UINT16: Final = 0xFFFF
MAX_UINT32: Final = 0xFFFFFFFF

_NS = re.compile(r"^ns=(\d{1,5});")
_NSU = re.compile(r"^nsu=([^;]+);")


class NodeIdError(ValueError):
    """A NodeId text that is not valid; the message says what and how to write it."""


@dataclass(frozen=True, slots=True)
class NodeIdSpec:
    """A parsed NodeId.

    Attributes
    ----------
    kind : {"i", "s", "g", "b"}
        Numeric, string, GUID or opaque identifier.
    identifier : int, str, uuid.UUID or bytes
        The identifier.
    namespace_index : int or None
        ``ns=`` (0 when neither ``ns=`` nor ``nsu=`` is given).
    namespace_uri : str or None
        ``nsu=``, resolved to an index per connection.
    """

    kind: Literal["i", "s", "g", "b"]
    identifier: int | str | uuid.UUID | bytes
    namespace_index: int | None = 0
    namespace_uri: str | None = None

    def __str__(self) -> str:
        if self.namespace_uri is not None:
            ns = f"nsu={self.namespace_uri};"
        else:
            ns = f"ns={self.namespace_index};" if self.namespace_index else ""
        if self.kind == "b":
            assert isinstance(self.identifier, bytes)
            ident = base64.b64encode(self.identifier).decode()
        else:
            ident = str(self.identifier)
        return f"{ns}{self.kind}={ident}"

    def namespace(self, namespace_array: Sequence[str]) -> int:
        """The namespace index on a server with this namespace array.

        Raises
        ------
        NodeIdError
            The URI is not in the array, or the index is beyond it.
        """
        if self.namespace_uri is not None:
            try:
                return list(namespace_array).index(self.namespace_uri)
            except ValueError:
                raise NodeIdError(
                    f"{self}: the server has no namespace {self.namespace_uri!r} "
                    f"(it has {len(namespace_array)}: {list(namespace_array)[:8]})"
                ) from None
        idx = int(self.namespace_index or 0)
        if idx >= len(namespace_array):
            raise NodeIdError(
                f"{self}: namespace index {idx} does not exist on the server "
                f"({len(namespace_array)} namespaces)"
            )
        return idx

    def to_ua(self, namespace_array: Sequence[str]) -> Any:
        """An ``asyncua.ua.NodeId`` for a server with this namespace array."""
        from asyncua import ua

        ident: Any = self.identifier
        index: Any = self.namespace(namespace_array)
        return ua.NodeId(ident, index)


def parse_node_id(text: str) -> NodeIdSpec:
    """Parse a NodeId in its text form.

    Raises
    ------
    NodeIdError
        With what is wrong and the accepted forms.

    Examples
    --------
    >>> parse_node_id("ns=2;s=KR-GT1.TT-CD")
    NodeIdSpec(kind='s', identifier='KR-GT1.TT-CD', namespace_index=2, namespace_uri=None)
    >>> str(parse_node_id("nsu=urn:kestrel-ridge:gt;i=1001"))
    'nsu=urn:kestrel-ridge:gt;i=1001'
    """
    if not isinstance(text, str):
        raise NodeIdError(f"a NodeId is text like 'ns=2;s=KR-GT1.TT-CD', got {type(text).__name__}")
    raw = text.strip()
    hint = "write e.g. 'ns=2;s=KR-GT1.TT-CD', 'nsu=urn:site:gt;i=1001', 'i=2258'"
    ns_index: int | None = 0
    ns_uri: str | None = None
    if raw.startswith("ns="):
        m = _NS.match(raw)
        if m is None:
            raise NodeIdError(f"NodeId {text[:120]!r}: 'ns=' needs a number and ';' — {hint}")
        ns_index = int(m.group(1))
        if ns_index > MAX_UINT16:
            raise NodeIdError(f"NodeId {text[:120]!r}: namespace index above 65535")
        raw = raw[m.end() :]
    elif raw.startswith("nsu="):
        m = _NSU.match(raw)
        if m is None:
            raise NodeIdError(f"NodeId {text[:120]!r}: 'nsu=' needs a URI and ';' — {hint}")
        ns_index, ns_uri = None, m.group(1)
        raw = raw[m.end() :]
    kind, sep, ident = raw.partition("=")
    if not sep or kind not in ("i", "s", "g", "b"):
        raise NodeIdError(
            f"NodeId {text[:120]!r}: the identifier must start with i=, s=, g= or b= — {hint}"
        )
    if not ident:
        raise NodeIdError(f"NodeId {text[:120]!r}: empty identifier")
    if kind == "i":
        if not ident.isdigit() or int(ident) > MAX_UINT32:
            raise NodeIdError(f"NodeId {text[:120]!r}: i= needs an integer 0..4294967295")
        return NodeIdSpec("i", int(ident), ns_index, ns_uri)
    if kind == "s":
        if len(ident) > MAX_IDENTIFIER:
            raise NodeIdError(f"NodeId {text[:60]!r}...: string identifier over 4096 characters")
        return NodeIdSpec("s", ident, ns_index, ns_uri)
    if kind == "g":
        try:
            return NodeIdSpec("g", uuid.UUID(ident), ns_index, ns_uri)
        except ValueError:
            raise NodeIdError(
                f"NodeId {text[:120]!r}: g= needs a GUID like 09087e75-8e5e-499b-954f-f2a9603db28a"
            ) from None
    try:
        data = base64.b64decode(ident, validate=True)
    except (binascii.Error, ValueError):
        raise NodeIdError(f"NodeId {text[:120]!r}: b= needs base64 text") from None
    if not data or len(data) > MAX_IDENTIFIER:
        raise NodeIdError(f"NodeId {text[:120]!r}: opaque identifier of 1..4096 bytes")
    return NodeIdSpec("b", data, ns_index, ns_uri)


def _validate(v: object) -> NodeIdSpec:
    if isinstance(v, NodeIdSpec):
        return v
    if not isinstance(v, str):
        raise NodeIdError(f"a NodeId is text like 'ns=2;s=KR-GT1.TT-CD', got {type(v).__name__}")
    return parse_node_id(v)


#: A NodeId field of a pydantic model (plant file): text in, :class:`NodeIdSpec` out.
NodeIdText = Annotated[NodeIdSpec, BeforeValidator(_validate), PlainSerializer(str)]

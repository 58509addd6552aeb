"""``brayscope opcua browse``: list the nodes of an OPC UA server, to fill in the plant file.

Connects to one endpoint with the given security, walks the address space from the Objects
folder (or ``--node``) down ``--depth`` levels and prints NodeId, browse name, node class, data
type, current value and its StatusCode.  NodeIds of namespaces above 0 are printed in the
``nsu=<namespace uri>;`` form, which does not change when the server renumbers namespaces.
Read-only: nothing is written to the server.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import sys
from typing import Any, TextIO

__all__ = ["add_parser", "run"]

EPILOG = """\
Passwords come from an environment variable (--password-env) or a file (--password-file),
never from the command line.  With --security sign or sign-and-encrypt the server
certificate must be in --trust-dir or equal --server-cert (never trusted on first use).

exit status: 0 listed, 1 connection or security failure, 2 bad arguments.

examples:
  brayscope opcua browse --endpoint opc.tcp://kr-dcs01:4840/
      lists the Objects folder two levels deep, e.g.
      nsu=urn:kestrel-ridge:gt;s=KR-GT1.TT-CD  2:TT-CD  Variable  Double  398.85  Good
  brayscope opcua browse --endpoint opc.tcp://kr-dcs01:4840/ \\
      --node "nsu=urn:kestrel-ridge:gt;s=KR-GT1" --depth 1 --tsv > kr-gt1-nodes.tsv
  brayscope opcua browse --endpoint opc.tcp://kr-dcs01:4840/ --security sign-and-encrypt \\
      --cert client.der --key client-key.pem --trust-dir pki/trusted \\
      --username kr-reader --password-env KR_OPCUA_PASSWORD
"""

_MODES = {"none": ("None", "None"), "sign": ("Basic256Sha256", "Sign")}
_MODES["sign-and-encrypt"] = ("Basic256Sha256", "SignAndEncrypt")


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``opcua`` (with its ``browse`` action)."""
    parser: argparse.ArgumentParser = subparsers.add_parser(
        "opcua",
        help="OPC UA tools: browse a server's nodes to fill in the plant file",
        description=__doc__.split("\n\n")[0].split(": ", 1)[1],
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    sub = parser.add_subparsers(dest="opcua_action", metavar="ACTION", required=True)
    b = sub.add_parser(
        "browse",
        help="list nodes (NodeId, browse name, class, data type, value)",
        description=__doc__.split("\n\n")[1],
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    b.add_argument("--endpoint", required=True, metavar="URL", help="opc.tcp://host:port/path")
    b.add_argument("--node", metavar="ID", help="NodeId to start from (default: Objects)")
    b.add_argument("--depth", type=int, default=2, metavar="N", help="levels to descend (2)")
    b.add_argument("--max-nodes", type=int, default=2000, metavar="N", help="stop after N (2000)")
    b.add_argument("--security", choices=sorted(_MODES), default="none", help="policy/mode")
    b.add_argument("--cert", metavar="FILE", help="client certificate (PEM or DER)")
    b.add_argument("--key", metavar="FILE", help="client private key")
    b.add_argument("--server-cert", metavar="FILE", help="pinned server certificate")
    b.add_argument("--trust-dir", metavar="DIR", help="trusted server certificates")
    b.add_argument("--username", metavar="NAME", help="user name identity")
    b.add_argument("--password-env", metavar="VAR", help="environment variable with the password")
    b.add_argument("--password-file", metavar="FILE", help="file with the password")
    b.add_argument("--tsv", action="store_true", help="tab-separated output with a header")
    return parser


def run(args: argparse.Namespace, out: TextIO | None = None, err: TextIO | None = None) -> int:
    """Browse and print; return the exit code."""
    from pydantic import ValidationError

    from daemon.feeds.opcua.browse import browse
    from daemon.feeds.opcua.nodeid import NodeIdError
    from daemon.feeds.opcua.session import (
        OpcUaConfigError,
        OpcUaEndpoint,
        OpcUaSecurity,
        OpcUaSecurityError,
    )

    out = out if out is not None else sys.stdout
    err = err if err is not None else sys.stderr
    policy, mode = _MODES[args.security]
    try:
        security = OpcUaSecurity(
            policy=policy,  # type: ignore[arg-type]
            mode=mode,  # type: ignore[arg-type]
            certificate_file=args.cert,
            private_key_file=args.key,
            server_certificate_file=args.server_cert,
            trusted_certificates_dir=args.trust_dir,
            username=args.username,
            password_env=args.password_env,
            password_file=args.password_file,
        )
        endpoint = OpcUaEndpoint(url=args.endpoint, security=security)
        password = security.password(os.environ)
    except (ValidationError, OpcUaConfigError) as exc:
        msgs = [e["msg"] for e in exc.errors()] if isinstance(exc, ValidationError) else [str(exc)]
        for m in msgs:
            print(f"brayscope opcua browse: {m}", file=err)
        return 2
    try:
        rows = asyncio.run(
            browse(
                endpoint,
                start=args.node,
                depth=max(1, args.depth),
                max_nodes=args.max_nodes,
                password=password,
            )
        )
    except NodeIdError as exc:
        print(f"brayscope opcua browse: --node: {exc}", file=err)
        return 2
    except (OpcUaSecurityError, OpcUaConfigError) as exc:
        print(f"brayscope opcua browse: {exc}", file=err)
        return 1
    except Exception as exc:  # network, protocol, service errors: reported, exit 1
        print(f"brayscope opcua browse: cannot browse {args.endpoint}: {exc}", file=err)
        return 1
    cols = ("node_id", "browse_name", "node_class", "data_type", "value", "status")
    if args.tsv:
        print("\t".join(("depth", *cols)), file=out)
        for r in rows:
            print("\t".join(str(getattr(r, c)) for c in ("depth", *cols)), file=out)
        return 0
    widths = [
        max(
            [
                len(c),
                *(len(str(getattr(r, c))) + (2 * r.depth if c == "node_id" else 0) for r in rows),
            ]
        )
        for c in cols
    ]
    print(
        "  ".join(c.upper().ljust(w) for c, w in zip(cols, widths, strict=True)).rstrip(), file=out
    )
    for r in rows:
        cells = [
            ("  " * r.depth + r.node_id) if c == "node_id" else str(getattr(r, c)) for c in cols
        ]
        print("  ".join(v.ljust(w) for v, w in zip(cells, widths, strict=True)).rstrip(), file=out)
    print(f"{len(rows)} node(s) from {args.endpoint}", file=err)
    return 0

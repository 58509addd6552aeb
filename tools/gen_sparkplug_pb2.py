"""Generate the Sparkplug B message classes from ``daemon/feeds/sparkplug/sparkplug_b.proto``.

Run at development time after editing the ``.proto`` (``grpcio-tools`` is a test/dev
dependency, pinned in ``pyproject.toml`` so that its bundled ``protoc`` gives the same output on
every machine; the runtime needs only ``protobuf``)::

    .venv/bin/python tools/gen_sparkplug_pb2.py

It writes ``sparkplug_b_pb2.py`` (the classes) and ``sparkplug_b_pb2.pyi`` (their type stubs)
next to the ``.proto``.  ``--out DIR`` writes them elsewhere instead; the test
``tests/test_sparkplug_payload.py::test_generated_classes_match_the_proto`` uses that to check
that the committed files are exactly what the ``.proto`` gives.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

PROTO_DIR = Path(__file__).resolve().parent.parent / "daemon" / "feeds" / "sparkplug"
PROTO = "sparkplug_b.proto"
OUTPUTS = ("sparkplug_b_pb2.py", "sparkplug_b_pb2.pyi")


def generate(out_dir: Path) -> list[Path]:
    """Run the bundled protoc on the schema; return the files written."""
    from grpc_tools import protoc

    out_dir.mkdir(parents=True, exist_ok=True)
    code = protoc.main(
        [
            "protoc",
            f"--proto_path={PROTO_DIR}",
            f"--python_out={out_dir}",
            f"--pyi_out={out_dir}",
            str(PROTO_DIR / PROTO),
        ]
    )
    if code != 0:
        raise SystemExit(f"protoc failed with exit code {code}")
    return [out_dir / name for name in OUTPUTS]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--out", type=Path, default=PROTO_DIR, help="output directory")
    args = parser.parse_args(argv)
    for path in generate(args.out):
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())

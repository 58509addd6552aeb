"""The ``brayscope`` command line.

Each sub-command lives in its own module exposing ``add_parser(subparsers)`` (which registers
the sub-command, its help text and its options) and ``run(args) -> int`` (the exit code).
Modules are imported only when their command runs, so ``brayscope --help`` stays fast.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from daemon import __version__

#: sub-command name -> module implementing it, in the order ``--help`` lists them.
COMMANDS: dict[str, str] = {
    "calc": "daemon.calc",
    "check": "daemon.check_cmd",
    "db": "daemon.db_cmd",
    "bench": "daemon.bench",
    "demo": "daemon.demo_cmd",
    "bench-live": "daemon.bench_live",
    "run": "daemon.run_cmd",
    "trend": "daemon.trend_cmd",
    "opcua": "daemon.opcua_cmd",
}

CAUTION = (
    "Advisory monitoring only: brayscope is not a protection or control system. Follow the "
    "manufacturer's limits, site procedures, local codes and licensed engineers."
)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="brayscope",
        description=(
            "Gas-turbine performance from plant measurements: reconstructs the actual Brayton "
            "cycle, computes component efficiencies, heat rate and corrected output, stores "
            "and publishes them. " + CAUTION
        ),
        epilog=(
            "Run 'brayscope COMMAND --help' for the options and examples of one command.\n\n"
            "examples:\n"
            "  brayscope demo                        the live path on an invented plant\n"
            "  brayscope calc --example | brayscope calc - -f table\n"
            "                                        one shipped snapshot, computed\n"
            "  brayscope check -c plant.toml         validate a plant file\n"
            "  brayscope run -c plant.toml           the daemon"
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"brayscope {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, module_name in COMMANDS.items():
        module = importlib.import_module(module_name)
        module.add_parser(sub)
        assert name in sub.choices, f"{module_name} did not register {name!r}"
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not args.command:
        parser.print_help()
        return 2
    module = importlib.import_module(COMMANDS[args.command])
    code: int = module.run(args)
    return code


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

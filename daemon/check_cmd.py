"""``brayscope check -c FILE``: validate a plant file without starting anything.

Prints a one-line summary (units, tags, MQTT subscriptions) and exits 0, or prints every
problem found, one per line as ``FILE: key.path: message — fix: ...``, and exits 2 (the exit
status ``brayscope run`` gives for the same problems, so a service manager can treat both alike).
Nothing is connected to: no broker, no database.
"""

from __future__ import annotations

import argparse
import sys
from typing import Any, TextIO

__all__ = ["add_parser", "run"]

EPILOG = """\
A mistyped unit of measure is reported with the key and the fix, e.g.
    plant.toml: units.KR-GT1.tags[3].uom: unknown unit 'degc' (tag kestrel/gt1/TT-CIT)
    — fix: use one of degC, K, degF, degR
A deprecated name (accepted in this release only) is reported as a warning with its fix.
Environment overrides (BRAYSCOPE_DATABASE_URL, BRAYSCOPE_BROKER_HOST, ...) are applied, and
secrets named by *_file keys or *_FILE variables must be readable.

exit status: 0 when the file is usable, 2 when it is not (as 'brayscope run' exits).

examples:
  brayscope check -c daemon/examples/kestrel-ridge.toml
      OK: 3 units, 38 tags, 27 subscriptions (daemon/examples/kestrel-ridge.toml)
  brayscope check -c plant.toml --tags
      also lists every tag with its SI conversion (x_SI = scale * x + offset)
  brayscope check -c plant.toml -q && brayscope run -c plant.toml
      start the daemon only when the file is usable"""


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``check``."""
    parser: argparse.ArgumentParser = subparsers.add_parser(
        "check",
        help="validate a plant file (units, tags, units of measure, fuel, secrets)",
        description=(
            "Validate a plant file completely and report every problem at once, with the key "
            "and the fix.  Connects to nothing."
        ),
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("-c", "--config", required=True, metavar="FILE", help="plant file (TOML)")
    parser.add_argument(
        "--tags", action="store_true", help="also list every tag with its conversion to SI"
    )
    parser.add_argument("-q", "--quiet", action="store_true", help="print only the errors")
    return parser


def run(args: argparse.Namespace, out: TextIO | None = None, err: TextIO | None = None) -> int:
    """Validate ``args.config``; return the exit code."""
    from daemon.config import PlantConfigError, load_plant

    out = out if out is not None else sys.stdout
    err = err if err is not None else sys.stderr
    try:
        plant = load_plant(args.config)
    except PlantConfigError as exc:
        for issue in exc.issues:
            print(str(issue), file=err)
        n = len(exc.issues)
        print(f"FAILED: {n} problem{'s' if n != 1 else ''} in {args.config}", file=err)
        return 2
    for issue in plant.deprecations:
        print(f"warning: {issue}", file=err)
    summary = (
        f"OK: {len(plant.units)} units, {plant.n_tags} tags, "
        f"{len(plant.subscriptions())} subscriptions ({args.config})"
    )
    if args.quiet:
        return 0
    if getattr(out, "isatty", lambda: False)():
        from rich.console import Console
        from rich.table import Table

        console = Console(file=out, highlight=False)
        console.print(f"[bold green]{summary}[/]")
        if args.tags:
            table = Table("unit", "topic", "key", "measurement", "uom", "scale", "offset", "gauge")
            for unit, tag in plant.iter_tags():
                c = tag.converter
                baro = _baro_text(tag)
                table.add_row(
                    unit,
                    tag.topic,
                    tag.key,
                    tag.measurement,
                    tag.uom,
                    f"{c.scale:.9g}",
                    f"{c.offset:.9g}",
                    baro,
                )
            console.print(table)
        return 0
    print(summary, file=out)
    if args.tags:
        for unit, tag in plant.iter_tags():
            c = tag.converter
            baro = _baro_text(tag)
            key = f"#{tag.key}" if tag.key else ""
            print(
                f"{unit}\t{tag.topic}{key}\t{tag.measurement}\t{tag.uom}\t"
                f"{c.target} = {c.scale:.9g}*x + {c.offset:.9g}{' ' + baro if baro else ''}",
                file=out,
            )
    return 0


def _baro_text(tag: Any) -> str:
    if not tag.is_gauge:
        return ""
    return f"+ {tag.baro_reference}" if tag.baro_reference else f"+ {tag.baro_pa:g} Pa"

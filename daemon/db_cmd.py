"""``brayscope db upgrade|current|purge -c FILE``: the database of a plant file.

``upgrade`` applies the schema migrations (the daemon also does this at start), ``current``
shows the schema revision in the database and the newest one this version knows, ``purge``
deletes rows past their retention period (``database.readings_retention_days`` for readings,
``database.results_retention_days`` for results, ``database.retention_days`` for the rest and
as the default of both; ``--days`` for every table).
The database URL is the plant file's ``database.url`` unless ``BRAYSCOPE_DATABASE_URL`` is set.
"""

from __future__ import annotations

import argparse
import sys
import time
from typing import Any, TextIO

__all__ = ["add_parser", "run"]

EPILOG = """\
exit status: 0 on success, 1 on a configuration or database error, 3 when 'current' finds the
schema behind this version (run 'brayscope db upgrade').

examples:
  brayscope db upgrade -c daemon/examples/kestrel-ridge.toml
      creates ./brayscope-data/brayscope.sqlite (SQLite, the example's default) and its tables
  BRAYSCOPE_DATABASE_URL=postgresql+psycopg://brayscope@db.example/brayscope \\
      brayscope db current -c plant.toml
      database revision: REV (head REV, up to date)
  brayscope db purge -c plant.toml --dry-run
      would delete: 120 results (older than 1825 days), 86400 readings (older than 90 days), ...
  brayscope db purge -c plant.toml --days 30 --dry-run
      shows how many rows of every table are older than 30 days, deletes nothing"""


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``db``."""
    parser: argparse.ArgumentParser = subparsers.add_parser(
        "db",
        help="database schema migrations and retention purge",
        description="Manage the database named by a plant file: migrate, show revision, purge.",
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument(
        "action", choices=("upgrade", "current", "purge"), help="what to do (see below)"
    )
    parser.add_argument("-c", "--config", required=True, metavar="FILE", help="plant file (TOML)")
    parser.add_argument(
        "--days",
        type=float,
        default=None,
        metavar="N",
        help="purge: delete rows of every table older than N days (default: each table's "
        "retention from the plant file's [database] section)",
    )
    parser.add_argument(
        "--dry-run", action="store_true", help="purge: count what would be deleted, delete nothing"
    )
    return parser


def run(args: argparse.Namespace, out: TextIO | None = None, err: TextIO | None = None) -> int:
    """Run one ``db`` action; return the exit code."""
    from sqlalchemy.exc import SQLAlchemyError

    from daemon.config import PlantConfigError, load_plant
    from daemon.storage import Store, redact_url
    from daemon.urls import mask_urls

    out = out if out is not None else sys.stdout
    err = err if err is not None else sys.stderr
    try:
        plant = load_plant(args.config)
    except PlantConfigError as exc:
        for issue in exc.issues:
            print(str(issue), file=err)
        print(f"FAILED: {len(exc.issues)} problem(s) in {args.config}", file=err)
        return 1
    url = plant.database.url
    store = Store.from_config(plant.database)
    try:
        if args.action == "upgrade":
            before = store.current_revision()
            store.upgrade()
            after = store.current_revision()
            print(f"database {redact_url(url)}: revision {before or 'empty'} -> {after}", file=out)
            return 0
        if args.action == "current":
            current = store.current_revision()
            head = store.head_revision()
            state = "up to date" if current == head else "behind: run 'brayscope db upgrade'"
            print(f"database revision: {current or 'none'} (head {head}, {state})", file=out)
            return 0 if current == head else 3
        if args.days is not None and args.days <= 0:
            print("--days must be > 0", file=err)
            return 1
        days = (
            dict.fromkeys(plant.database.retention_by_table(), args.days)
            if args.days is not None
            else plant.database.retention_by_table()
        )
        now = time.time()
        counts = store.purge(
            {table: now - d * 86400.0 for table, d in days.items()}, dry_run=args.dry_run
        )
        verb = "would delete" if args.dry_run else "deleted"
        detail = ", ".join(
            f"{n} {table} (older than {days[table]:g} days)" for table, n in counts.items()
        )
        print(f"{verb}: {detail}", file=out)
        return 0
    except SQLAlchemyError as exc:
        why = mask_urls(str(exc))
        print(f"database error ({redact_url(url)}): {exc.__class__.__name__}: {why}", file=err)
        return 1
    finally:
        store.close()

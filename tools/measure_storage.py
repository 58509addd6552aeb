"""Measure the disk space of one stored reading row and one result row, with their indexes.

Writes ``--readings`` raw readings and ``--results`` result rows through
:class:`daemon.storage.Store` into an empty database, the way the daemon writes them (batches
of one second of every tag of the example plant, ``daemon/examples/kestrel-ridge.toml``), and
reports the growth of the database per row:

* SQLite: the file size after a WAL checkpoint (``PRAGMA wal_checkpoint(TRUNCATE)``), measured
  after each table is filled, so the difference is that table with its indexes;
* PostgreSQL: ``pg_total_relation_size`` of the table (heap, TOAST and every index), in a
  private schema that is dropped afterwards.

The figures feed the disk-sizing formula in docs/deployment.md.  Run::

    .venv/bin/python tools/measure_storage.py
    .venv/bin/python tools/measure_storage.py --postgres postgresql+psycopg://postgres@127.0.0.1/test

Values are random numbers in each tag's plausible range, written with the precision of a
typical transmitter (raw) and as doubles (SI); every result column is filled (a fully valid
result, the largest row).  A site whose topics or measurement names are longer stores a few
bytes more per reading (every text column is stored in each row).
"""

from __future__ import annotations

import argparse
import json
import os
import random
import sys
import tempfile
import time
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import sqlalchemy as sa

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from daemon.config import load_plant  # noqa: E402
from daemon.storage import ResultRow, Store, schema  # noqa: E402
from daemon.types import Reading  # noqa: E402

EXAMPLE = ROOT / "daemon" / "examples" / "kestrel-ridge.toml"
T0 = 1_780_000_000.0  # 2026-05-28, an arbitrary start


@dataclass(frozen=True)
class Figure:
    backend: str
    table: str
    rows: int
    bytes: int

    @property
    def bytes_per_row(self) -> float:
        return self.bytes / self.rows


def _readings(n: int, rng: random.Random) -> Iterator[list[Reading]]:
    """Batches of readings: one second of every tag of the example plant per batch."""
    plant = load_plant(EXAMPLE)
    tags = list(plant.iter_tags())
    second = 0
    made = 0
    while made < n:
        batch = []
        ts = T0 + second
        for unit, tag in tags:
            if made >= n:
                break
            raw = round(rng.uniform(tag.low, tag.high), 3)
            conv = tag.converter
            batch.append(
                Reading(
                    unit=unit,
                    measurement=tag.measurement,
                    value=conv.scale * raw + conv.offset,
                    source_ts=ts + rng.random() * 0.1,
                    received_ts=ts + 0.1 + rng.random() * 0.05,
                    quality="good",
                    topic=tag.topic,
                    raw_value=raw,
                    raw_uom=tag.uom,
                )
            )
            made += 1
        yield batch
        second += 1


def _results(n: int, units: list[str], tick_s: float, rng: random.Random) -> Iterator[ResultRow]:
    for i in range(n):
        yield ResultRow(
            unit=units[i % len(units)],
            ts=T0 + (i // len(units)) * tick_s,
            values={name: rng.uniform(0.1, 1e7) for name in schema.RESULT_VALUE_COLUMNS},
            inputs={name: rng.uniform(0.1, 1e6) for name in schema.RESULT_INPUT_COLUMNS},
            status=0,
            reasons="",
            steady_state=True,
            r_statistic=rng.uniform(0.9, 1.1),
            air_mass_flow_source="heat_balance",
            correction_method="model",
        )


def _measure(
    backend: str, store: Store, n_readings: int, n_results: int, size: Any
) -> list[Figure]:
    """Fill an empty ``store`` and return the growth of ``size(table)`` per table."""
    try:
        plant = load_plant(EXAMPLE)
        store.upgrade()
        store.upsert_units(plant.units)
        rng = random.Random(20260601)
        before = size("readings")
        for batch in _readings(n_readings, rng):
            store.write_readings(batch)
        figures = [Figure(backend, "readings", n_readings, size("readings") - before)]
        before = size("results")
        rows = list(_results(n_results, list(plant.units), plant.daemon.tick_s, rng))
        for i in range(0, len(rows), 100):
            store.write_results(rows[i : i + 100])
        figures.append(Figure(backend, "results", n_results, size("results") - before))
        return figures
    finally:
        store.close()


def measure_sqlite(n_readings: int, n_results: int) -> list[Figure]:
    """Per-row growth of a SQLite file (WAL checkpointed before each size)."""
    with tempfile.TemporaryDirectory(prefix="brayscope-size-") as d:
        path = Path(d) / "size.sqlite"
        store = Store(f"sqlite:///{path}")

        def size(_table: str) -> int:
            with store.engine.connect() as conn:
                conn.exec_driver_sql("PRAGMA wal_checkpoint(TRUNCATE)")
            return path.stat().st_size

        return _measure("sqlite", store, n_readings, n_results, size)


@contextmanager
def _pg_schema(url: str) -> Iterator[str]:
    name = f"bs_size_{os.getpid()}_{uuid.uuid4().hex[:8]}"
    admin = sa.create_engine(url)
    with admin.begin() as conn:
        conn.execute(sa.text(f'CREATE SCHEMA "{name}"'))
    try:
        yield name
    finally:
        with admin.begin() as conn:
            conn.execute(sa.text(f'DROP SCHEMA IF EXISTS "{name}" CASCADE'))
        admin.dispose()


def measure_postgres(url: str, n_readings: int, n_results: int) -> list[Figure]:
    """Per-row growth of ``pg_total_relation_size`` (heap, TOAST, indexes) in a private schema."""
    with _pg_schema(url) as name:
        store = Store(url, schema=name)

        def size(table: str) -> int:
            with store.engine.connect() as conn:
                return int(
                    conn.execute(
                        sa.text("SELECT pg_total_relation_size(CAST(:t AS regclass))"),
                        {"t": f'"{name}".{table}'},
                    ).scalar_one()
                )

        return _measure("postgresql", store, n_readings, n_results, size)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        description="Bytes per stored reading and result row (with indexes), SQLite and "
        "PostgreSQL.",
        epilog="example:\n  python tools/measure_storage.py --postgres "
        "postgresql+psycopg://postgres@127.0.0.1:5432/test",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--readings", type=int, default=100_000, help="reading rows (100000)")
    parser.add_argument("--results", type=int, default=10_000, help="result rows (10000)")
    parser.add_argument("--postgres", metavar="URL", help="also measure this PostgreSQL database")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    args = parser.parse_args(argv)
    if args.readings <= 0 or args.results <= 0:
        parser.error("--readings and --results must be > 0")
    started = time.monotonic()
    figures = measure_sqlite(args.readings, args.results)
    if args.postgres:
        figures += measure_postgres(args.postgres, args.readings, args.results)
    if args.json:
        doc = [dict(vars(f), bytes_per_row=round(f.bytes_per_row, 1)) for f in figures]
        print(json.dumps(doc, indent=2))
        return 0
    print(f"{'backend':<11} {'table':<9} {'rows':>8} {'bytes':>12} {'bytes/row':>10}")
    for f in figures:
        print(f"{f.backend:<11} {f.table:<9} {f.rows:>8} {f.bytes:>12} {f.bytes_per_row:>10.1f}")
    print(f"({time.monotonic() - started:.1f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())

"""``brayscope run``: the live daemon.

Loads and validates the plant file, then runs :class:`daemon.runtime.Runtime` until SIGTERM or
SIGINT, drains within ``--stop-timeout`` seconds and exits 0.  Logs are JSON objects, one per
line, on standard error (``ts``, ``level``, ``logger``, ``msg`` and any extra fields), so journald
or a log shipper can parse them; secrets are never logged: every URL in a message or an
exception is masked (:func:`daemon.urls.mask_urls`: password and secret query parameters
replaced by ``***``).

Exit codes: 0 clean stop; 2 plant file not usable (each problem printed with its fix); 1 the
runtime failed (configuration refused by the feed, HTTP port unavailable ...).

Advisory monitoring only: brayscope is not a protection or control system.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import logging
import signal
import sys
import time
from datetime import UTC, datetime
from typing import Any

from daemon.urls import mask_urls

__all__ = ["JsonFormatter", "MaskingFormatter", "add_parser", "configure_logging", "run"]

_STD_ATTRS = frozenset(
    logging.LogRecord("", 0, "", 0, "", (), None).__dict__.keys() | {"message", "asctime"}
)


class JsonFormatter(logging.Formatter):
    """Format a log record as one JSON object per line (every URL in it masked)."""

    def format(self, record: logging.LogRecord) -> str:
        doc: dict[str, Any] = {
            "ts": datetime.fromtimestamp(record.created, UTC).isoformat(timespec="milliseconds"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "msg": mask_urls(record.getMessage()),
        }
        for k, v in record.__dict__.items():
            if k not in _STD_ATTRS and not k.startswith("_"):
                plain = v if isinstance(v, str | int | float | bool | None) else repr(v)
                doc[k] = mask_urls(plain) if isinstance(plain, str) else plain
        if record.exc_info:
            doc["exc"] = mask_urls(self.formatException(record.exc_info))
        return json.dumps(doc, ensure_ascii=False, default=str)


class MaskingFormatter(logging.Formatter):
    """A plain-text formatter that masks every URL of the formatted line."""

    def format(self, record: logging.LogRecord) -> str:
        return mask_urls(super().format(record))


def configure_logging(level: str = "info", fmt: str = "json") -> None:
    """Send logs to stderr as JSON lines (``fmt="json"``) or plain text (``"text"``)."""
    handler = logging.StreamHandler(sys.stderr)
    if fmt == "json":
        handler.setFormatter(JsonFormatter())
    else:
        handler.setFormatter(MaskingFormatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    root = logging.getLogger()
    for h in list(root.handlers):
        root.removeHandler(h)
    root.addHandler(handler)
    root.setLevel(level.upper())
    # third-party chatter at warning unless asked for debug
    for name in ("uvicorn", "uvicorn.error", "aiomqtt", "sqlalchemy", "alembic"):
        logging.getLogger(name).setLevel("DEBUG" if level == "debug" else "WARNING")


RUN_EPILOG = """\
exit status: 0 after a clean stop (SIGTERM or SIGINT), 1 when the runtime failed to start,
2 when the plant file is not usable.  Secrets come from the environment or files, never the
plant file (docs/configuration.md); routes, metrics and topics are in docs/operations.md.

examples:
  brayscope run -c daemon/examples/kestrel-ridge.toml --log-format text
      the example plant against a broker on 127.0.0.1:1883, SQLite in ./brayscope-data
  BRAYSCOPE_DATABASE_URL=postgresql+psycopg://brayscope@db.example/brayscope \\
  BRAYSCOPE_BROKER_PASSWORD_FILE=/etc/brayscope/broker.pw brayscope run -c plant.toml
      production: PostgreSQL, and the broker password from a file readable by the daemon only
  curl -s http://127.0.0.1:9478/readyz; curl -s http://127.0.0.1:9478/metrics | head
      is it ready, and what does it export"""


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``brayscope run``."""
    p: argparse.ArgumentParser = subparsers.add_parser(
        "run",
        help="run the live daemon (MQTT in, results to SQL, metrics, API, MQTT out)",
        description=(
            "Subscribe to the plant's sensor topics, compute every unit's cycle each tick, "
            "store readings and results, serve /metrics, /healthz, /readyz and the API, and "
            "publish results. Advisory monitoring only: not a protection or control system."
        ),
        epilog=RUN_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("-c", "--config", required=True, metavar="PLANT.toml", help="plant file")
    p.add_argument(
        "--stop-timeout",
        type=float,
        default=20.0,
        metavar="S",
        help="seconds allowed for draining after SIGTERM/SIGINT (default 20)",
    )
    p.add_argument(
        "--log-level",
        choices=("debug", "info", "warning", "error"),
        default="info",
        help="log level (default info)",
    )
    p.add_argument(
        "--log-format", choices=("json", "text"), default="json", help="log format (default json)"
    )
    p.add_argument("--no-http", action="store_true", help="do not serve the HTTP endpoint")
    p.add_argument("--no-publish", action="store_true", help="do not publish results to MQTT")
    return p


async def _main(args: argparse.Namespace, plant: Any) -> int:
    from daemon.runtime import Runtime

    log = logging.getLogger("brayscope.run")
    runtime = Runtime(plant, serve_http=not args.no_http, publish=not args.no_publish)
    loop = asyncio.get_running_loop()
    stop_requested: dict[str, float] = {}

    def on_signal(sig: signal.Signals) -> None:
        if "t" in stop_requested:
            log.warning("second %s: stopping now", sig.name)
            for task in asyncio.all_tasks(loop):
                task.cancel()
            return
        stop_requested["t"] = time.monotonic()
        log.info("%s received: stopping", sig.name)
        runtime.request_stop()

    for sig in (signal.SIGTERM, signal.SIGINT):
        loop.add_signal_handler(sig, on_signal, sig)
    run_task = asyncio.create_task(runtime.run(stop_timeout_s=args.stop_timeout))
    try:
        await run_task
    except asyncio.CancelledError:
        return 0 if stop_requested else 1
    except ExceptionGroup as group:
        for exc in group.exceptions:
            log.error("runtime failed: %s", exc, exc_info=exc)
        return 1
    except Exception as exc:
        log.error("runtime failed: %s", exc, exc_info=exc)
        return 1
    finally:
        runtime.store.close()
    return 0


def run(args: argparse.Namespace) -> int:
    """Entry point of ``brayscope run``."""
    from daemon.config import PlantConfigError, load_plant

    configure_logging(args.log_level, args.log_format)
    try:
        plant = load_plant(args.config)
    except PlantConfigError as exc:
        for issue in exc.issues:
            print(str(issue), file=sys.stderr)
        return 2
    return asyncio.run(_main(args, plant))

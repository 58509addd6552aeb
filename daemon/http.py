"""HTTP endpoint of the daemon: metrics, health, a small read API, one write route, a live page.

Routes
------
``GET /metrics``
    Prometheus text format (no token; bind the endpoint to loopback or a monitoring network).
``GET /healthz``
    200 while the process runs its loops (liveness).
``GET /readyz``
    200 when the broker connection is up and the database answers, else 503 with the failing
    checks (readiness).
``GET /api/units``, ``GET /api/units/{unit}/latest``, ``GET /api/units/{unit}/results``
    Configured units (with their new-and-clean baselines), their newest results, results in a
    time range.
``GET /api/units/{unit}/trend``
    Degradation trend of one KPI for maintenance planning (:mod:`daemon.trend_cmd`).
``POST /api/events``
    Record an operator event (note, compressor wash, maintenance ...) in the database.
``GET /``
    The live page (static HTML polling the API, plots drawn in the browser as inline SVG;
    nothing is fetched from outside).

Access: the API and metrics bind to ``127.0.0.1`` by default.  When a token is configured
(``BRAYSCOPE_API_TOKEN`` for read and write, ``BRAYSCOPE_API_READ_TOKEN`` for read only; or
their ``_FILE`` variants), every ``/api`` route needs ``Authorization: Bearer <token>`` (401
without or with a wrong one); a write needs the read-write token (403 for the read-only one).
Without a read-write token, writes are refused with 403.  Tokens are compared in constant time
(:func:`hmac.compare_digest`) and never logged.
"""

from __future__ import annotations

import contextlib
import hmac
import logging
import math
import re
from collections.abc import Awaitable, Callable, Iterator
from datetime import UTC, datetime, timedelta
from importlib import resources
from typing import Annotated, Any, Literal, Protocol

import uvicorn
from fastapi import Depends, FastAPI, HTTPException, Path, Query, Request, Response
from fastapi.responses import HTMLResponse, JSONResponse
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer
from pydantic import BaseModel, ConfigDict, Field, SecretStr, model_validator

from daemon import __version__
from daemon.trend_cmd import KPIS

__all__ = [
    "API_CAUTION",
    "ApiBackend",
    "EventIn",
    "ResultOut",
    "TrendOut",
    "UnitOut",
    "create_app",
    "parse_time",
    "serve",
]

API_CAUTION = (
    "**Advisory monitoring only.** brayscope is not a protection or control system: do not use "
    "its numbers to trip, start, load or protect a machine. Follow the manufacturer's limits, "
    "site procedures, local codes and licensed engineers."
)

#: Longest time range one results query may span.
MAX_RANGE = timedelta(days=31)
#: Most rows one results query returns.
MAX_ROWS = 50_000
log = logging.getLogger("brayscope.http")

_KPI_HELP = "result to trend, one of: " + ", ".join(KPIS)

#: Longest time range one trend query may span.
MAX_TREND_RANGE = timedelta(days=400)

UNIT_RE = r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$"
KIND_RE = r"^[a-z][a-z0-9_]{0,31}$"


# --------------------------------------------------------------------------------------------
# Schemas
# --------------------------------------------------------------------------------------------


class _Out(BaseModel):
    model_config = ConfigDict(extra="forbid")


class UnitOut(_Out):
    """A configured unit."""

    name: str
    unit_type: str
    description: str = ""
    results_topic: str | None = None
    baseline: dict[str, float] = Field(
        default_factory=dict,
        description="new-and-clean values from the plant file, by result name",
    )


class UnitsOut(_Out):
    site: str
    caution: str
    units: list[UnitOut]


class ResultOut(_Out):
    """One stored result (NaN and NULL appear as null)."""

    unit: str
    ts: str = Field(description="Snapshot time, ISO 8601 UTC")
    ts_epoch_s: float
    valid: bool = Field(description="true when no reason bit other than warnings is set")
    status: int = Field(description="models.status.Reason bits; 0 = clean")
    reasons: list[str]
    warnings: list[str]
    steady_state: Literal["steady", "transient", "undecided"] = Field(
        description="steady-state test of the snapshot: steady, transient, or undecided "
        "(the test is still warming up; a missing signal counts as transient)"
    )
    r_statistic: float | None
    labels: dict[str, str | None]
    results: dict[str, float | None]
    inputs: dict[str, float | None]


class ResultsOut(_Out):
    unit: str
    since: str
    until: str
    count: int
    truncated: bool
    results: list[ResultOut]


class TrendIntervalOut(_Out):
    start_fired_hours: float | None
    level: float | None = Field(description="fitted KPI right after the wash (or record start)")
    level_se: float | None


class TrendLineOut(_Out):
    t_ref_fired_hours: float | None
    level: float | None
    rate_per_1000h: float | None = Field(description="KPI change per 1000 fired hours")


class TrendFitOut(_Out):
    reason: str = Field(
        description="ok, too_few_points, no_spread_in_fired_hours, no_wash_in_record, "
        "constant_record"
    )
    between_wash_rate_per_1000h: float | None = Field(
        description="KPI change per 1000 fired hours between washes (fouling plus wear)"
    )
    between_wash_rate_per_1000h_se: float | None
    post_wash_rate_per_1000h: float | None = Field(
        description="change of the post-wash levels per 1000 fired hours (what washing cannot "
        "recover); null without a wash in the record"
    )
    post_wash_rate_per_1000h_se: float | None
    overall_rate_per_1000h: float | None
    overall_rate_per_1000h_se: float | None
    r_squared: float | None
    residual_std: float | None
    n: int
    intervals: list[TrendIntervalOut]
    current_line: TrendLineOut
    latest_value: float | None


class TrendWashOut(_Out):
    fired_hours: float | None
    ts: str
    size: float | None = Field(description="step of the KPI at the wash, in its unit")


class TrendForecastOut(_Out):
    threshold: float
    limit: Literal["lower", "upper"]
    line: Literal["current", "post_wash", "overall"]
    k: float
    status: str = Field(description="ahead, already_beyond, never, no_fit")
    fired_hours: float | None
    fired_hours_low: float | None
    fired_hours_high: float | None
    band_closed: bool = Field(description="false: the rate is not significant at this k")
    fired_hours_after_last: float | None
    fired_fraction: float | None = Field(
        description="fired hours per calendar hour over the record (for the date estimate)"
    )
    estimated_date: str | None


class TrendPointOut(_Out):
    fired_hours: float | None
    ts: str
    value: float | None
    n: int


class TrendOut(_Out):
    """Degradation trend of one KPI (see ``brayscope trend --help``)."""

    unit: str
    kpi: str
    kpi_unit: str
    caution: str
    time_basis: str
    since: str
    until: str
    max_gap_s: float
    fired_hours_at_start: float
    first_ts: str | None
    last_ts: str | None
    n_results: int
    n_firing: int
    n_steady: int
    fired_hours: float
    bin_h: float
    n_points: int
    noise_std: float | None
    min_step: float | None
    window: int
    baseline: float | None
    fit: TrendFitOut
    washes: list[TrendWashOut]
    forecast: TrendForecastOut | None
    points: list[TrendPointOut]


class HealthOut(_Out):
    status: Literal["ok"]
    version: str
    uptime_s: float


class ReadyOut(_Out):
    ready: bool
    checks: dict[str, bool]
    detail: dict[str, str]


class EventIn(BaseModel):
    """An operator event to record (e.g. an off-line compressor wash); stored in ``events``
    with ``source = "operator"`` and the same ``kind``, ``unit`` and ``detail``."""

    model_config = ConfigDict(extra="forbid")

    kind: Annotated[str, Field(pattern=KIND_RE, description="lower-case word, e.g. 'wash'")]
    unit: Annotated[str | None, Field(default=None, pattern=UNIT_RE)] = None
    detail: Annotated[str, Field(default="", max_length=2000, description="free text")] = ""

    @model_validator(mode="before")
    @classmethod
    def _renamed_keys(cls, data: Any) -> Any:
        # "text" was the name of "detail" before; accepted for one release
        from daemon.renames import RENAMED_EVENT_KEYS, deprecation_message

        if isinstance(data, dict):
            for old, new in RENAMED_EVENT_KEYS.items():
                if old in data and new not in data:
                    log.warning(deprecation_message("POST /api/events", old, new))
                    data = {**data, new: data[old]}
                    del data[old]
        return data


class EventOut(_Out):
    recorded: bool
    source: Literal["operator"]
    kind: str
    unit: str | None


class ErrorOut(_Out):
    detail: str


# --------------------------------------------------------------------------------------------
# What the app needs from the runtime
# --------------------------------------------------------------------------------------------


class ApiBackend(Protocol):
    """The runtime side of the HTTP app (see :class:`daemon.runtime.Runtime`)."""

    site: str

    def units_info(self) -> list[dict[str, Any]]: ...

    def uptime_s(self) -> float: ...

    def readiness(self) -> tuple[bool, dict[str, bool], dict[str, str]]: ...

    def metrics_text(self) -> bytes: ...

    async def latest(self, unit: str, n: int) -> list[dict[str, Any]]: ...

    async def results(
        self, unit: str, since: float, until: float, limit: int
    ) -> list[dict[str, Any]]: ...

    async def add_event(self, kind: str, unit: str | None, detail: str) -> None: ...


def parse_time(text: str | None, default: datetime) -> datetime:
    """Parse an API time: ISO 8601 (naive = UTC) or epoch seconds; ``default`` when absent.

    Raises
    ------
    ValueError
        Not a time.
    """
    if text is None or text == "":
        return default
    t = text.strip()
    if re.fullmatch(r"[+-]?\d+(\.\d+)?", t):
        v = float(t)
        if not math.isfinite(v) or abs(v) > 1e11:
            raise ValueError("epoch seconds out of range")
        return datetime.fromtimestamp(v, UTC)
    d = datetime.fromisoformat(t.replace("Z", "+00:00"))
    return d if d.tzinfo is not None else d.replace(tzinfo=UTC)


def _iso(d: datetime) -> str:
    return d.astimezone(UTC).isoformat().replace("+00:00", "Z")


# --------------------------------------------------------------------------------------------
# The app
# --------------------------------------------------------------------------------------------


def _same(a: str, b: SecretStr | None) -> bool:
    if b is None:
        return False
    return hmac.compare_digest(a.encode(), b.get_secret_value().encode())


def create_app(
    backend: ApiBackend,
    *,
    api_token: SecretStr | None = None,
    read_token: SecretStr | None = None,
) -> FastAPI:
    """Build the FastAPI application over ``backend``.

    Parameters
    ----------
    backend : ApiBackend
        The runtime (units, readiness, metrics, store access).
    api_token : SecretStr, optional
        Read-write token; without it every write is refused (403).
    read_token : SecretStr, optional
        Read-only token.
    """
    bearer = HTTPBearer(auto_error=False, description="Bearer token (read or read-write)")
    any_token = api_token is not None or read_token is not None

    def _who(cred: HTTPAuthorizationCredentials | None) -> str | None:
        if cred is None or cred.scheme.lower() != "bearer":
            return None
        if _same(cred.credentials, api_token):
            return "write"
        if _same(cred.credentials, read_token):
            return "read"
        return None

    def _unauth() -> HTTPException:
        return HTTPException(
            status_code=401,
            detail="missing or wrong bearer token",
            headers={"WWW-Authenticate": "Bearer"},
        )

    async def need_read(
        # a default, not Annotated: the closure's ``bearer`` is not visible to the
        # string annotations FastAPI resolves under ``from __future__ import annotations``
        cred: HTTPAuthorizationCredentials | None = Depends(bearer),  # noqa: B008
    ) -> None:
        if any_token and _who(cred) is None:
            raise _unauth()

    async def need_write(
        # a default, not Annotated: the closure's ``bearer`` is not visible to the
        # string annotations FastAPI resolves under ``from __future__ import annotations``
        cred: HTTPAuthorizationCredentials | None = Depends(bearer),  # noqa: B008
    ) -> None:
        who = _who(cred)
        if api_token is None:
            raise HTTPException(
                status_code=403,
                detail="API writes are disabled: set BRAYSCOPE_API_TOKEN (or _FILE) to enable",
            )
        if who is None:
            raise _unauth()
        if who != "write":
            raise HTTPException(status_code=403, detail="read-only token: writes not allowed")

    units_by_name = {u["name"]: u for u in backend.units_info()}
    baselines = _baselines(backend, list(units_by_name))

    def known_unit(unit: str) -> str:
        if unit not in units_by_name:
            raise HTTPException(status_code=404, detail="unknown unit")
        return unit

    app = FastAPI(
        title="brayscope",
        version=__version__,
        description=(
            API_CAUTION + "\n\nGas-turbine performance results (component efficiencies, heat rate, "
            "corrected output) computed from plant measurements. Units are SI except heat "
            "rates (kJ/kWh). Times are UTC."
        ),
        docs_url="/docs",
        redoc_url=None,
    )
    errors: dict[int | str, dict[str, Any]] = {
        401: {"model": ErrorOut, "description": "missing or wrong token"},
        404: {"model": ErrorOut, "description": "unknown unit"},
    }

    @app.get("/healthz", response_model=HealthOut, tags=["health"])
    async def healthz() -> HealthOut:
        """Liveness: the process is up and serving."""
        return HealthOut(status="ok", version=__version__, uptime_s=backend.uptime_s())

    @app.get(
        "/readyz",
        response_model=ReadyOut,
        tags=["health"],
        responses={503: {"model": ReadyOut, "description": "not ready"}},
    )
    async def readyz() -> JSONResponse:
        """Readiness: broker connected and database answering (503 otherwise)."""
        ok, checks, detail = backend.readiness()
        body = ReadyOut(ready=ok, checks=checks, detail=detail).model_dump()
        return JSONResponse(body, status_code=200 if ok else 503)

    @app.get(
        "/metrics",
        tags=["health"],
        response_class=Response,
        responses={200: {"content": {"text/plain": {}}, "description": "Prometheus text"}},
    )
    async def metrics() -> Response:
        """Prometheus metrics (text exposition format)."""
        from daemon.metrics import CONTENT_TYPE_LATEST

        return Response(backend.metrics_text(), media_type=CONTENT_TYPE_LATEST)

    @app.get(
        "/api/units",
        response_model=UnitsOut,
        tags=["results"],
        dependencies=[Depends(need_read)],
        responses={401: errors[401]},
    )
    async def units() -> UnitsOut:
        """Configured units."""
        return UnitsOut(
            site=backend.site,
            caution=API_CAUTION.replace("**", ""),
            units=[
                UnitOut(**{"baseline": baselines.get(u["name"], {}), **u})
                for u in backend.units_info()
            ],
        )

    @app.get(
        "/api/units/{unit}/latest",
        response_model=list[ResultOut],
        tags=["results"],
        dependencies=[Depends(need_read)],
        responses=errors,
    )
    async def latest(
        unit: Annotated[str, Path(max_length=64)],
        n: Annotated[int, Query(ge=1, le=1000, description="number of results")] = 1,
    ) -> list[dict[str, Any]]:
        """The newest ``n`` results of a unit, newest first."""
        return await backend.latest(known_unit(unit), n)

    @app.get(
        "/api/units/{unit}/results",
        response_model=ResultsOut,
        tags=["results"],
        dependencies=[Depends(need_read)],
        responses={**errors, 422: {"model": ErrorOut, "description": "bad time range"}},
    )
    async def results(
        unit: Annotated[str, Path(max_length=64)],
        since: Annotated[
            str | None, Query(max_length=64, description="ISO 8601 or epoch s; default until-24h")
        ] = None,
        until: Annotated[
            str | None, Query(max_length=64, description="ISO 8601 or epoch s; default now")
        ] = None,
        limit: Annotated[int, Query(ge=1, le=MAX_ROWS)] = 10_000,
    ) -> ResultsOut | JSONResponse:
        """Results of a unit with ``since <= ts < until``, oldest first (at most 31 days)."""
        known_unit(unit)
        try:
            t1 = parse_time(until, datetime.now(UTC))
            t0 = parse_time(since, t1 - timedelta(hours=24))
        except (ValueError, OverflowError, OSError):
            return JSONResponse({"detail": "since/until: ISO 8601 or epoch seconds"}, 422)
        if t1 <= t0 or t1 - t0 > MAX_RANGE:
            return JSONResponse({"detail": "need since < until, at most 31 days apart"}, 422)
        rows = await backend.results(unit, t0.timestamp(), t1.timestamp(), limit + 1)
        truncated = len(rows) > limit
        rows = rows[:limit]
        return ResultsOut(
            unit=unit,
            since=_iso(t0),
            until=_iso(t1),
            count=len(rows),
            truncated=truncated,
            results=[ResultOut(**r) for r in rows],
        )

    @app.get(
        "/api/units/{unit}/trend",
        response_model=TrendOut,
        tags=["trends"],
        dependencies=[Depends(need_read)],
        responses={**errors, 422: {"model": ErrorOut, "description": "bad parameters"}},
    )
    async def trend(  # noqa: PLR0917
        unit: Annotated[str, Path(max_length=64)],
        kpi: Annotated[
            str,
            Query(max_length=64, description=_KPI_HELP),
        ] = "compressor_isentropic_efficiency",
        since: Annotated[
            str | None, Query(max_length=64, description="ISO 8601 or epoch s; default until-90d")
        ] = None,
        until: Annotated[
            str | None, Query(max_length=64, description="ISO 8601 or epoch s; default now")
        ] = None,
        threshold: Annotated[
            str | None,
            Query(
                max_length=32,
                description="planner's limit, adds a forecast: an efficiency as 0.85 or 85%, "
                "power in W, heat rate in kJ/kWh",
            ),
        ] = None,
        line: Annotated[
            Literal["current", "post_wash", "overall", "nonrecoverable"],
            Query(
                description="line to forecast with: current (no further wash), post_wash, "
                "overall ('nonrecoverable' is the deprecated name of post_wash)"
            ),
        ] = "current",
        bin_h: Annotated[
            float | None, Query(gt=0, le=1e4, description="fired hours per averaged point")
        ] = None,
        min_step: Annotated[
            float | None, Query(gt=0, description="smallest wash step, KPI unit")
        ] = None,
        window: Annotated[
            int | None, Query(ge=2, le=10_000, description="points per step-test window")
        ] = None,
        max_gap_s: Annotated[
            float, Query(gt=0, le=86400 * 7, description="longest interval counted as fired")
        ] = 600.0,
        fired_hours_at_start: Annotated[
            float, Query(ge=0, le=1e7, description="the unit's fired hours at the first result")
        ] = 0.0,
    ) -> TrendOut | JSONResponse:
        """Degradation trend of a KPI from steady, valid results: rate per 1000 fired
        hours between washes and of the post-wash levels, wash steps, and the fired hours
        at which the fitted line reaches ``threshold`` (±2 standard errors).

        Fired hours are counted from result timestamps while the unit fires (fuel flow
        > 0); the unit's own counter is not read.  A statistical estimate for planning, not
        a maintenance instruction."""
        from daemon.renames import (
            RENAMED_RESULTS,
            RENAMED_TREND_LINES,
            deprecation_message,
        )
        from daemon.trend_cmd import TrendRecord, collect_async, parse_threshold, trend_report

        known_unit(unit)
        if kpi in RENAMED_RESULTS:
            log.warning(
                deprecation_message("GET /api/units/{unit}/trend kpi", kpi, RENAMED_RESULTS[kpi])
            )
            kpi = RENAMED_RESULTS[kpi]
        if line in RENAMED_TREND_LINES:
            log.warning(
                deprecation_message(
                    "GET /api/units/{unit}/trend line", line, RENAMED_TREND_LINES[line]
                )
            )
        which: Literal["current", "post_wash", "overall"] = (
            "post_wash" if line == "nonrecoverable" else line
        )
        if kpi not in KPIS:
            return JSONResponse({"detail": _KPI_HELP}, 422)
        limit: float | None = None
        if threshold is not None:
            try:
                limit = parse_threshold(threshold, KPIS[kpi])
            except ValueError as exc:
                return JSONResponse({"detail": f"threshold: {exc}"}, 422)
        try:
            t1 = parse_time(until, datetime.now(UTC))
            t0 = parse_time(since, t1 - timedelta(days=90))
        except (ValueError, OverflowError, OSError):
            return JSONResponse({"detail": "since/until: ISO 8601 or epoch seconds"}, 422)
        if t1 <= t0 or t1 - t0 > MAX_TREND_RANGE:
            return JSONResponse({"detail": "need since < until, at most 400 days apart"}, 422)
        record = TrendRecord(KPIS[kpi], max_gap_s=max_gap_s)

        async def fetch(u: str, a: float, b: float) -> list[dict[str, Any]]:
            return await backend.results(u, a, b, MAX_ROWS + 1)

        await collect_async(fetch, unit, t0.timestamp(), t1.timestamp(), record, limit=MAX_ROWS)
        base = baselines.get(unit, {}).get(kpi)
        rep = trend_report(
            record,
            threshold=limit,
            which=which,
            bin_h=bin_h,
            min_step=min_step,
            window=window,
            fired_hours_at_start=fired_hours_at_start,
            baseline=base,
        )
        return TrendOut(unit=unit, since=_iso(t0), until=_iso(t1), **rep)

    @app.post(
        "/api/events",
        response_model=EventOut,
        status_code=201,
        tags=["events"],
        dependencies=[Depends(need_write)],
        responses={
            401: errors[401],
            403: {"model": ErrorOut, "description": "read-only token or writes disabled"},
            404: errors[404],
        },
    )
    async def add_event(event: EventIn) -> EventOut:
        """Record an operator event (needs the read-write token)."""
        if event.unit is not None:
            known_unit(event.unit)
        await backend.add_event(event.kind, event.unit, event.detail)
        return EventOut(recorded=True, source="operator", kind=event.kind, unit=event.unit)

    @app.get("/", response_class=HTMLResponse, include_in_schema=False)
    async def live_page() -> HTMLResponse:
        return HTMLResponse(_live_page())

    @app.exception_handler(RuntimeError)
    async def _runtime_error(_request: Request, exc: RuntimeError) -> JSONResponse:
        # the database went away mid-request: say so instead of a bare 500
        return JSONResponse({"detail": f"temporarily unavailable: {exc}"}, status_code=503)

    return app


def _baselines(backend: Any, units: list[str]) -> dict[str, dict[str, float]]:
    """New-and-clean baselines by unit and result name, from the backend's plant file
    (``backend.plant``, the runtime's loaded plant file) when there is one."""
    plant = getattr(backend, "plant", None)
    if plant is None or not hasattr(plant, "units"):
        return {}
    return {
        u: {k: float(v) for k, v in (getattr(plant.units[u], "baseline", {}) or {}).items()}
        for u in units
        if u in plant.units
    }


def _live_page() -> str:
    return (resources.files("daemon") / "static" / "live.html").read_text(encoding="utf-8")


# --------------------------------------------------------------------------------------------
# Serving inside the daemon's event loop
# --------------------------------------------------------------------------------------------


class _Server(uvicorn.Server):
    """uvicorn server that leaves signal handling to the daemon."""

    @contextlib.contextmanager
    def capture_signals(self) -> Iterator[None]:
        yield


async def serve(
    app: FastAPI,
    host: str,
    port: int,
    *,
    started: Callable[[], Awaitable[None]] | None = None,
    stop: Any = None,
) -> None:
    """Serve ``app`` on ``host:port`` until ``stop`` (an :class:`asyncio.Event`) is set or the
    task is cancelled.  ``started`` is awaited once the socket listens."""
    import asyncio
    import socket

    family = socket.AF_INET6 if ":" in host else socket.AF_INET
    sock = socket.socket(family, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    try:
        sock.bind((host, port))
    except OSError as exc:
        sock.close()
        raise RuntimeError(f"cannot listen on {host}:{port}: {exc.strerror}") from exc
    sock.listen(128)
    sock.setblocking(False)
    config = uvicorn.Config(
        app,
        log_config=None,
        access_log=False,
        lifespan="off",
        server_header=False,
    )
    server = _Server(config)
    task = asyncio.create_task(server.serve(sockets=[sock]), name="http-server")
    try:
        while not server.started:
            if task.done():
                task.result()
                raise RuntimeError(f"HTTP server did not start on {host}:{port}")
            await asyncio.sleep(0.02)
        if started is not None:
            await started()
        if stop is not None:
            waiter = asyncio.ensure_future(stop.wait())
            await asyncio.wait({waiter, task}, return_when=asyncio.FIRST_COMPLETED)
            waiter.cancel()
        else:
            await asyncio.shield(task)
    finally:
        server.should_exit = True
        with contextlib.suppress(asyncio.CancelledError):
            await task
        sock.close()

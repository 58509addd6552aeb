"""HTTP app: health, readiness, metrics, API access control, schema, live page.

Sources of the expected behaviour:
- RFC 6750 (OAuth 2.0 Bearer Token Usage), section 3: a request without or with an invalid
  token gets 401 with a ``WWW-Authenticate: Bearer`` header; a token with too little scope gets
  403 (``insufficient_scope``).
- RFC 9110 (HTTP Semantics): 201 Created, 404 Not Found, 503 Service Unavailable.
- Prometheus exposition format: content type ``text/plain; version=0.0.4`` (as produced by the
  reference client library ``prometheus_client``).
- Kubernetes probe convention (common practice): liveness and readiness are separate; a
  not-ready service answers non-2xx on its readiness endpoint.
"""

from __future__ import annotations

import asyncio
import json
from datetime import UTC, datetime
from typing import Any
from urllib.parse import quote

import httpx
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from prometheus_client import CollectorRegistry
from pydantic import SecretStr

from daemon.http import create_app, parse_time
from daemon.metrics import Metrics

WRITE = "w-" + "9f3c1a7e5b" * 3
READ = "r-" + "1b2d3f4a5c" * 3


def _row(unit: str, ts: float) -> dict[str, Any]:
    return {
        "unit": unit,
        "ts": datetime.fromtimestamp(ts, UTC).isoformat().replace("+00:00", "Z"),
        "ts_epoch_s": ts,
        "valid": True,
        "status": 0,
        "reasons": [],
        "warnings": [],
        "steady_state": "steady",
        "r_statistic": 0.9,
        "labels": {"air_mass_flow_source": "heat_balance", "correction_method": "model"},
        "results": {"compressor_isentropic_efficiency": 0.87, "heat_rate_lhv_kj_per_kwh": None},
        "inputs": {"generator_power": 4.4e7},
    }


class FakeBackend:
    site = "Kestrel Ridge Energy Park"

    def __init__(self) -> None:
        self.ready = (True, {"broker": True, "database": True}, {"broker": "ok", "database": "ok"})
        self.events: list[tuple[str, str | None, str]] = []
        self.metrics = Metrics(CollectorRegistry(), ["KR-GT1", "KR-GT2"])
        self.queries: list[tuple[str, float, float, int]] = []

    def units_info(self) -> list[dict[str, Any]]:
        return [
            {"name": "KR-GT1", "unit_type": "gas_turbine", "description": "45 MW class"},
            {"name": "KR-GT2", "unit_type": "gas_turbine", "description": "older"},
        ]

    def uptime_s(self) -> float:
        return 12.5

    def readiness(self) -> tuple[bool, dict[str, bool], dict[str, str]]:
        return self.ready

    def metrics_text(self) -> bytes:
        return self.metrics.render()

    async def latest(self, unit: str, n: int) -> list[dict[str, Any]]:
        return [_row(unit, 1_800_000_000.0 - 10 * i) for i in range(n)]

    async def results(
        self, unit: str, since: float, until: float, limit: int
    ) -> list[dict[str, Any]]:
        self.queries.append((unit, since, until, limit))
        return [_row(unit, since + 10 * i) for i in range(min(3, limit))]

    async def add_event(self, kind: str, unit: str | None, detail: str) -> None:
        self.events.append((kind, unit, detail))


class TestClient:
    """Synchronous calls into the ASGI app through httpx's ASGI transport (no sockets)."""

    __test__ = False

    def __init__(self, app: Any) -> None:
        self.app = app

    def request(self, method: str, path: str, **kw: Any) -> httpx.Response:
        async def go() -> httpx.Response:
            transport = httpx.ASGITransport(app=self.app)
            async with httpx.AsyncClient(transport=transport, base_url="http://test") as c:
                return await c.request(method, path, **kw)

        return asyncio.run(go())

    def get(self, path: str, **kw: Any) -> httpx.Response:
        return self.request("GET", path, **kw)

    def post(self, path: str, **kw: Any) -> httpx.Response:
        return self.request("POST", path, **kw)


@pytest.fixture
def backend() -> FakeBackend:
    return FakeBackend()


@pytest.fixture
def client(backend: FakeBackend) -> TestClient:
    app = create_app(backend, api_token=SecretStr(WRITE), read_token=SecretStr(READ))
    return TestClient(app)


def test_healthz_and_readyz(client: TestClient, backend: FakeBackend) -> None:
    r = client.get("/healthz")
    assert r.status_code == 200
    assert r.json()["status"] == "ok"
    r = client.get("/readyz")
    assert r.status_code == 200
    assert r.json()["ready"] is True
    backend.ready = (False, {"broker": True, "database": False}, {"database": "ping failed"})
    r = client.get("/readyz")
    assert r.status_code == 503
    assert r.json()["checks"] == {"broker": True, "database": False}


def test_metrics_endpoint_is_prometheus_text(client: TestClient, backend: FakeBackend) -> None:
    backend.metrics.readings_received(3)
    r = client.get("/metrics")
    assert r.status_code == 200
    assert r.headers["content-type"].startswith("text/plain")
    assert (
        "version=0.0.4" in r.headers["content-type"] or "version=1.0.0" in r.headers["content-type"]
    )
    assert "brayscope_readings_received_total 3.0" in r.text
    assert WRITE not in r.text and READ not in r.text


@pytest.mark.parametrize(
    "path", ["/api/units", "/api/units/KR-GT1/latest", "/api/units/KR-GT1/results"]
)
def test_reads_need_a_token_when_tokens_are_configured(client: TestClient, path: str) -> None:
    r = client.get(path)
    assert r.status_code == 401  # RFC 6750 3.1: no token
    assert r.headers["www-authenticate"].lower().startswith("bearer")
    r = client.get(path, headers={"Authorization": "Bearer wrong-token"})
    assert r.status_code == 401  # invalid token
    r = client.get(path, headers={"Authorization": "Basic " + WRITE})
    assert r.status_code == 401
    for tok in (READ, WRITE):
        r = client.get(path, headers={"Authorization": f"Bearer {tok}"})
        assert r.status_code == 200, (path, r.text)


def test_writes_need_the_read_write_token(client: TestClient, backend: FakeBackend) -> None:
    body = {"kind": "wash", "unit": "KR-GT2", "detail": "offline compressor wash"}
    assert client.post("/api/events", json=body).status_code == 401
    r = client.post("/api/events", json=body, headers={"Authorization": f"Bearer {READ}"})
    assert r.status_code == 403  # RFC 6750 3.1: insufficient scope
    assert backend.events == []
    r = client.post("/api/events", json=body, headers={"Authorization": f"Bearer {WRITE}"})
    assert r.status_code == 201
    assert r.json() == {"recorded": True, "source": "operator", "kind": "wash", "unit": "KR-GT2"}
    assert backend.events == [("wash", "KR-GT2", "offline compressor wash")]
    # "text" was the name of "detail" before this release: still accepted, with a warning
    old = {"kind": "note", "text": "inlet filter changed"}
    r = client.post("/api/events", json=old, headers={"Authorization": f"Bearer {WRITE}"})
    assert r.status_code == 201 and backend.events[-1] == ("note", None, "inlet filter changed")
    bad = {"kind": "Wash Now!", "detail": "x"}
    r = client.post("/api/events", json=bad, headers={"Authorization": f"Bearer {WRITE}"})
    assert r.status_code == 422
    r = client.post(
        "/api/events",
        json={"kind": "note", "unit": "KR-GT9"},
        headers={"Authorization": f"Bearer {WRITE}"},
    )
    assert r.status_code == 404


def test_without_tokens_reads_are_open_and_writes_refused(backend: FakeBackend) -> None:
    c = TestClient(create_app(backend))
    assert c.get("/api/units").status_code == 200
    r = c.post("/api/events", json={"kind": "note"})
    assert r.status_code == 403
    assert "BRAYSCOPE_API_TOKEN" in r.json()["detail"]
    assert backend.events == []


def test_units_latest_and_results(client: TestClient, backend: FakeBackend) -> None:
    h = {"Authorization": f"Bearer {READ}"}
    units = client.get("/api/units", headers=h).json()
    assert [u["name"] for u in units["units"]] == ["KR-GT1", "KR-GT2"]
    assert "not a protection or control system" in units["caution"]
    latest = client.get("/api/units/KR-GT1/latest?n=2", headers=h).json()
    assert len(latest) == 2 and latest[0]["unit"] == "KR-GT1"
    assert client.get("/api/units/KR-GT9/latest", headers=h).status_code == 404
    r = client.get(
        "/api/units/KR-GT1/results",
        params={"since": "2027-01-01T00:00:00Z", "until": "2027-01-01T06:00:00+00:00"},
        headers=h,
    )
    assert r.status_code == 200
    body = r.json()
    assert body["count"] == 3
    unit, since, until, _limit = backend.queries[-1]
    assert unit == "KR-GT1"
    assert since == datetime(2027, 1, 1, tzinfo=UTC).timestamp()
    assert until - since == 6 * 3600
    r = client.get(
        "/api/units/KR-GT1/results", params={"since": "soon", "until": "later"}, headers=h
    )
    assert r.status_code == 422
    r = client.get(
        "/api/units/KR-GT1/results",
        params={"since": "2027-01-01T00:00:00Z", "until": "2026-01-01T00:00:00Z"},
        headers=h,
    )
    assert r.status_code == 422


def test_openapi_and_live_page_carry_the_caution(client: TestClient) -> None:
    spec = client.get("/openapi.json").json()
    assert "not a protection or control system" in spec["info"]["description"]
    assert "manufacturer's limits" in spec["info"]["description"]
    page = client.get("/")
    assert page.status_code == 200
    assert "not a protection or control system" in page.text
    assert "licensed engineers" in page.text


def test_parse_time_forms() -> None:
    # ISO 8601 with zone, naive (taken as UTC) and epoch seconds name the same instant
    t = datetime(2027, 3, 1, 12, 0, tzinfo=UTC)
    assert parse_time("2027-03-01T12:00:00Z", t) == t
    assert parse_time("2027-03-01T13:00:00+01:00", t) == t
    assert parse_time("2027-03-01T12:00:00", t) == t
    assert parse_time(str(t.timestamp()), t) == t
    assert parse_time(None, t) is t
    with pytest.raises(ValueError):
        parse_time("nan", t)


@settings(
    max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    unit=st.one_of(st.sampled_from(["KR-GT1", "KR-GT2"]), st.text(max_size=80)),
    since=st.one_of(st.none(), st.text(max_size=70)),
    until=st.one_of(st.none(), st.text(max_size=70)),
    n=st.integers(min_value=-5, max_value=5000),
)
def test_no_server_errors_on_arbitrary_queries(
    client: TestClient, unit: str, since: str | None, until: str | None, n: int
) -> None:
    h = {"Authorization": f"Bearer {READ}"}
    params = {k: v for k, v in {"since": since, "until": until}.items() if v is not None}
    u = quote(unit, safe="")
    for path, p in (
        (f"/api/units/{u}/results", params),
        (f"/api/units/{u}/latest", {"n": n}),
    ):
        r = client.get(path, params=p, headers=h)
        assert r.status_code < 500, (path, p, r.status_code, r.text)
        if r.status_code == 200:
            json.loads(r.text)


class TrendBackend(FakeBackend):
    """Stored results of a compressor losing 0.015 per 1000 h, washed at 150 fired hours
    (+0.004), one result every 10 min, all steady and firing; a plant file with a baseline."""

    T0 = 1_800_000_000.0
    RATE = -0.015  # per 1000 h
    WASH_H = 150.0
    STEP = 0.004

    def __init__(self) -> None:
        super().__init__()
        from types import SimpleNamespace

        import numpy as np

        rng = np.random.default_rng(3)
        self.rows: list[dict[str, Any]] = []
        for i in range(6 * 300):
            h = i / 6.0
            eta = 0.872 + self.RATE / 1000.0 * h + (self.STEP if h >= self.WASH_H else 0.0)
            r = _row("KR-GT1", self.T0 + 600.0 * i)
            r["results"] = {"compressor_isentropic_efficiency": eta + rng.normal(0, 2e-4)}
            r["inputs"] = {"fuel_mass_flow": 2.6, "generator_power": 4.4e7}
            self.rows.append(r)
        unit = SimpleNamespace(baseline={"compressor_isentropic_efficiency": 0.872})
        self.plant = SimpleNamespace(units={"KR-GT1": unit, "KR-GT2": SimpleNamespace()})

    async def results(
        self, unit: str, since: float, until: float, limit: int
    ) -> list[dict[str, Any]]:
        self.queries.append((unit, since, until, limit))
        rows = [r for r in self.rows if since <= r["ts_epoch_s"] < until and r["unit"] == unit]
        return rows[:limit]


def test_trend_route_returns_the_fit_washes_and_forecast() -> None:
    b = TrendBackend()
    c = TestClient(create_app(b))
    r = c.get(
        "/api/units/KR-GT1/trend",
        params={"since": str(b.T0 - 60), "until": str(b.T0 + 400 * 3600), "threshold": "86.5%"},
    )
    assert r.status_code == 200, r.text
    doc = r.json()
    # least-squares slope of a line with one level shift (Draper & Smith 1998, ch. 1)
    assert doc["fit"]["between_wash_rate_per_1000h"] == pytest.approx(b.RATE, abs=0.001)
    assert doc["fit"]["current_line"]["rate_per_1000h"] == pytest.approx(b.RATE, abs=0.001)
    assert [round(w["fired_hours"]) for w in doc["washes"]] == [150]
    assert doc["washes"][0]["size"] == pytest.approx(b.STEP, abs=5e-4)
    assert doc["baseline"] == pytest.approx(0.872)
    # after the wash: 0.872 + 0.004 - 0.015e-3 * 150 = 0.87375 at 150 h, so 0.865 is reached
    # (0.87375 - 0.865) / 0.015e-3 = 583 h later: 733 h (t* = t0 + (y* - L) / r)
    fc = doc["forecast"]
    assert fc["status"] == "ahead" and fc["threshold"] == pytest.approx(0.865)
    assert fc["fired_hours"] == pytest.approx(150 + (0.87375 - 0.865) / 0.015e-3, abs=40)
    assert "not a maintenance instruction" in doc["caution"]
    assert doc["time_basis"].startswith("fired hours counted from result timestamps")
    # baselines appear with the units
    units = c.get("/api/units").json()["units"]
    assert units[0]["baseline"] == {"compressor_isentropic_efficiency": 0.872}
    assert units[1]["baseline"] == {}


def test_trend_route_refuses_bad_parameters_and_is_described() -> None:
    b = TrendBackend()
    c = TestClient(create_app(b))
    assert c.get("/api/units/KR-GT1/trend", params={"kpi": "vibration"}).status_code == 422
    # an efficiency threshold of 86 would mean 8600 %: refused with what to write instead
    r = c.get("/api/units/KR-GT1/trend", params={"threshold": "86"})
    assert r.status_code == 422 and "write 0.86 or 86%" in r.json()["detail"]
    # old names of this release's renames are still accepted (with a logged warning)
    r = c.get(
        "/api/units/KR-GT1/trend",
        params={"kpi": "heat_rate_kJ_per_kWh", "line": "nonrecoverable", "threshold": "11000"},
    )
    assert r.status_code == 200 and r.json()["kpi"] == "heat_rate_lhv_kj_per_kwh"
    assert r.json()["forecast"]["line"] == "post_wash"
    assert c.get("/api/units/KR-GT9/trend").status_code == 404
    r = c.get("/api/units/KR-GT1/trend", params={"since": "0", "until": str(b.T0)})
    assert r.status_code == 422  # more than 400 days
    spec = c.get("/openapi.json").json()
    op = spec["paths"]["/api/units/{unit}/trend"]["get"]
    names = {p["name"] for p in op["parameters"]}
    assert {"kpi", "since", "until", "threshold", "line"} <= names
    assert "TrendOut" in spec["components"]["schemas"]
    # an empty range is an answer, not an error
    r = c.get("/api/units/KR-GT2/trend")
    assert r.status_code == 200 and r.json()["fit"]["reason"] == "too_few_points"


def test_live_page_is_self_contained_and_plots_from_the_api(client: TestClient) -> None:
    import re

    page = client.get("/").text
    # nothing fetched from outside: no external script, style, image or font; the only
    # absolute URL is the SVG namespace name, an identifier that is never retrieved (W3C
    # Namespaces in XML 1.0, section 2; from memory)
    urls = set(re.findall(r"https?://[^\s\"'<>)]+", page))
    assert urls == {"http://www.w3.org/2000/svg"}, urls
    assert not re.search(r"<(script|link|img|iframe)[^>]+(src|href)=", page)
    assert "/results?limit=" in page and "since=" in page  # trends come from our own API
    assert "baseline" in page and "advisory monitoring only" in page.lower()

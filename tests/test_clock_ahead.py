"""A reading stamped a few minutes in the future must not mask the correct readings after it.

The rule under test (``daemon.assembly.hold_time``): a reading counts at
``min(source_ts, received_ts)``, so a source clock running ahead is held in receive order, the
next correct reading replaces it, and while it is held its measurement carries the warning
``clock_ahead``.  The rule uses only stored columns (``source_ts``, ``received_at``), so a warm
start from the database ends in the same state.

Check values: 50 °C = 323.15 K and 11.85 °C = 285.00 K (ITS-90 / SI Brochure, 9th ed.,
2.3.1: T/K = t/°C + 273.15).  The future offset, 290 s, lies inside the default
``future_tolerance_s`` of 300 s, as in the fault found under injection.
"""

from __future__ import annotations

import json
import math
import time
import uuid
from pathlib import Path
from typing import Any

import pytest
from live_support import snapshot_messages, topic_of, write_plant
from test_runtime import _publish, _until, running

from daemon.assembly import CLOCK_AHEAD_SLACK_S, Assembler, UnitSpec, hold_time
from daemon.config import load_plant
from daemon.runtime import Runtime
from daemon.types import Quarantined, Reading
from models.status import WARNING_REASONS, Reason

T0 = 1_796_119_200.0  # 2026-12-01T10:00:00Z
HOT = 323.15  # 50 degC in K
GOOD = 285.0  # 11.85 degC in K
AHEAD_S = 290.0


def _rd(value: float, source_ts: float, received_ts: float) -> Reading:
    return Reading(
        "KR-GT1", "ambient_temperature", value, source_ts, received_ts, "good", "t", value, "K"
    )


def _assembler() -> Assembler:
    spec = UnitSpec("KR-GT1", "gas_turbine", {"ambient_temperature": 60.0})
    return Assembler([spec], 1.0, clock=lambda: T0)


def test_hold_time_rule() -> None:
    assert hold_time(T0, T0 + 0.05) == (T0, False)  # ordinary latency: the source time
    assert hold_time(T0 + 0.5, T0) == (T0, False)  # jitter below the slack: not flagged
    assert hold_time(T0 + AHEAD_S, T0) == (T0, True)
    assert CLOCK_AHEAD_SLACK_S < AHEAD_S
    assert Reason.CLOCK_AHEAD & WARNING_REASONS  # a warning: the result stays valid


def test_a_future_reading_is_replaced_by_the_next_correct_one() -> None:
    a = _assembler()
    a.ingest([_rd(HOT, T0 + AHEAD_S, T0)])
    snap = a.snapshot("KR-GT1", T0 + 0.5)
    assert snap is not None
    assert snap.values["ambient_temperature"] == HOT
    assert snap.quality["ambient_temperature"] == int(Reason.CLOCK_AHEAD)
    assert snap.age_s["ambient_temperature"] == pytest.approx(0.5)  # ages from its receipt
    # the next correct reading, one second later, replaces it
    a.ingest([_rd(GOOD, T0 + 1.0, T0 + 1.02)])
    snap = a.snapshot("KR-GT1", T0 + 2.0)
    assert snap is not None
    assert snap.values["ambient_temperature"] == GOOD
    assert snap.quality["ambient_temperature"] == 0
    assert a.counters.clock_ahead == 1
    # and a shuffled/redelivered old reading still cannot move the value back in time
    a.ingest([_rd(290.0, T0 - 10.0, T0 + 3.0)])
    snap = a.snapshot("KR-GT1", T0 + 3.0)
    assert snap is not None and snap.values["ambient_temperature"] == GOOD


def test_a_future_bad_mark_does_not_mask_later_good_readings() -> None:
    a = _assembler()
    a.ingest([_rd(GOOD, T0 - 1.0, T0 - 1.0)])
    q = Quarantined(
        T0, "t", b"{}", "out_of_range", "", "KR-GT1", "ambient_temperature", T0 + AHEAD_S
    )
    a.ingest([], [q])
    snap = a.snapshot("KR-GT1", T0 + 0.5)
    assert snap is not None and math.isnan(snap.values["ambient_temperature"])
    a.ingest([_rd(GOOD + 1.0, T0 + 1.0, T0 + 1.0)])
    snap = a.snapshot("KR-GT1", T0 + 2.0)
    assert snap is not None
    assert snap.values["ambient_temperature"] == GOOD + 1.0
    assert snap.quality["ambient_temperature"] == 0


# --------------------------------------------------------------------------------------------
# the live daemon and its warm start, against a real broker and database
# --------------------------------------------------------------------------------------------


def _plant(tmp_path: Path, port: int, db: str, prefix: str, client_id: str) -> Any:
    path, _, _ = write_plant(
        tmp_path, database_url=db, broker_port=port, prefix=prefix, client_id=client_id
    )
    return load_plant(path)


def _in_ambient(rt: Runtime) -> tuple[float | None, list[str]]:
    rows = rt.store.latest_results("KR-GT1", 1)
    if not rows:
        return None, []
    row = rows[0]
    warnings = [n for n in str(row["reasons"]).split(",") if n]
    return row["in_ambient_temperature"], warnings


@pytest.mark.services
async def test_live_future_reading_and_warm_start(
    tmp_path: Path, mqtt_broker: Any, store_url: str
) -> None:
    mqtt_broker.require(v5=True)
    print(f"broker: {mqtt_broker.describe()}; database: {store_url.rsplit('@', maxsplit=1)[-1]}")
    prefix = f"bstest/{uuid.uuid4().hex[:10]}"
    client_id = f"bs-ahead-{uuid.uuid4().hex[:8]}"
    amb = topic_of(prefix, "KR-GT1", "ambient_temperature")
    plant = _plant(tmp_path, mqtt_broker.port, store_url, prefix, client_id)
    rt = Runtime(plant, serve_http=False, publish=False)
    async with running(rt):
        now = time.time()
        base = [m for m in snapshot_messages(prefix, "KR-GT1", now - 2) if m[0] != amb]
        ahead = (amb, json.dumps({"value": 50.0, "ts": now + AHEAD_S}).encode())
        await _publish(mqtt_broker.port, [*base, ahead])

        def held_hot() -> bool:
            value, _ = _in_ambient(rt)
            return value is not None and abs(value - HOT) < 1e-9

        await _until(held_hot, 20, "a result computed from the future reading")
        _, reasons = _in_ambient(rt)
        assert "clock_ahead" in reasons  # flagged while it is held
        row = rt.store.latest_results("KR-GT1", 1)[0]
        assert row["status"] & ~int(WARNING_REASONS) == 0  # still a valid result

        # the correct reading after it: taken, not ignored as older
        correct = (amb, json.dumps({"value": 11.85, "ts": time.time()}).encode())
        await _publish(mqtt_broker.port, [correct])

        def held_good() -> bool:
            value, reasons = _in_ambient(rt)
            return value is not None and abs(value - GOOD) < 1e-9 and "clock_ahead" not in reasons

        await _until(held_good, 20, "the correct reading replacing the future one")
        # both readings are stored with their own source times
        assert rt.store.count("readings") == len(base) + 2

    # warm start from the stored readings: the correct value is held, not the future one
    rt2 = Runtime(
        _plant(tmp_path, mqtt_broker.port, store_url, prefix, client_id),
        serve_http=False,
        publish=False,
    )
    async with running(rt2):
        await _until(lambda: bool(rt2.ticks), 10, "a tick after the warm start")
        snap = rt2.assembler.snapshot("KR-GT1", math.floor(time.time()))
        assert snap is not None
        assert snap.values["ambient_temperature"] == pytest.approx(GOOD, abs=1e-9)
        assert snap.quality["ambient_temperature"] == 0

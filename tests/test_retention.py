"""Separate retention for raw readings and results (``[database]`` of the plant file).

Raw readings are the bulk of the database (one row per tag per second, results one row per
unit per tick: docs/deployment.md, "Disk sizing"), so a plant keeps them for a shorter period
than the results it trends over years.  Checked against real databases (``store_url``: a
SQLite file and a PostgreSQL schema): the plant-file keys, ``Store.purge`` with a cut-off per
table, ``brayscope db purge`` and the daemon's hourly purge task.
"""

from __future__ import annotations

import asyncio
import time
from pathlib import Path

import pytest
from live_support import ambient_reading, free_port, plant_toml

from daemon import cli
from daemon.config import PlantConfigError, load_plant
from daemon.storage import ResultRow, Store
from daemon.types import Quarantined

DAY = 86400.0


def _plant(tmp_path: Path, database_lines: str, url: str = "sqlite:///./db.sqlite") -> Path:
    text = plant_toml(
        prefix="kestrel-ret",
        broker_port=free_port(),
        database_url=url,
        http_port=free_port(),
        client_id="brayscope-retention-test",
    )
    marker = f'url = "{url}"\n'
    assert marker in text
    path = tmp_path / "plant.toml"
    path.write_text(text.replace(marker, marker + database_lines), encoding="utf-8")
    return path


def _fill(store: Store, now: float) -> None:
    """Rows 10 and 100 days old in every table, and one of each now."""
    for age in (100.0, 10.0, 0.0):
        ts = now - age * DAY
        store.write_readings([ambient_reading(ts, topic="kestrel-ret/kr-gt1/ambient_temperature")])
        store.write_results([ResultRow(unit="KR-GT1", ts=ts, values={"air_mass_flow": 120.0})])
        store.write_quarantine([Quarantined(ts, "x/y", b"{", "malformed_json", "", None)])
        store.write_event("start", "test", ts=ts)


def test_retention_keys_default_to_retention_days(tmp_path: Path) -> None:
    both = load_plant(_plant(tmp_path, "retention_days = 400\n"))
    assert both.database.readings_retention_days is None
    assert both.database.retention_by_table() == {
        "results": 400.0,
        "readings": 400.0,
        "quarantine": 400.0,
        "events": 400.0,
    }
    own = load_plant(
        _plant(
            tmp_path,
            "retention_days = 60\nreadings_retention_days = 30\nresults_retention_days = 1825\n",
        )
    )
    assert own.database.retention_by_table() == {
        "results": 1825.0,
        "readings": 30.0,
        "quarantine": 60.0,
        "events": 60.0,
    }


@pytest.mark.parametrize("line", ["readings_retention_days = 0", "results_retention_days = -5"])
def test_non_positive_retention_is_refused_by_check(
    tmp_path: Path, line: str, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _plant(tmp_path, line + "\n")
    with pytest.raises(PlantConfigError) as info:
        load_plant(path)
    key = "database." + line.split(maxsplit=1)[0]
    assert [i.key_path for i in info.value.issues] == [key]
    assert cli.main(["check", "-c", str(path)]) == 2
    assert key in capsys.readouterr().err


def test_purge_with_a_cutoff_per_table(store_url: str) -> None:
    now = time.time()
    with Store(store_url) as store:
        store.upgrade()
        store.ensure_unit("KR-GT1", "gas_turbine")
        _fill(store, now)
        cutoffs = {"readings": now - 5 * DAY, "results": now - 50 * DAY}
        assert store.purge(cutoffs, dry_run=True) == {"results": 1, "readings": 2}
        assert store.count("readings") == 3
        assert store.purge(cutoffs) == {"results": 1, "readings": 2}
        assert store.count("readings") == 1 and store.count("results") == 2
        # tables not named keep everything
        assert store.count("quarantine") == 3 and store.count("events") == 3
        with pytest.raises(ValueError, match="no retention for \\['units'\\]"):
            store.purge({"units": now})


def test_db_purge_uses_each_tables_retention(
    store_url: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _plant(
        tmp_path,
        "retention_days = 60\nreadings_retention_days = 5\nresults_retention_days = 1825\n",
    )
    now = time.time()
    with Store(store_url) as store:
        store.upgrade()
        store.ensure_unit("KR-GT1", "gas_turbine")
        _fill(store, now)
    env = pytest.MonkeyPatch()
    env.setenv("BRAYSCOPE_DATABASE_URL", store_url)
    try:
        assert cli.main(["db", "purge", "-c", str(path)]) == 0
    finally:
        env.undo()
    out = capsys.readouterr().out
    assert out.startswith("deleted: ")
    assert "0 results (older than 1825 days)" in out
    assert "2 readings (older than 5 days)" in out
    assert "1 quarantine (older than 60 days)" in out and "1 events (older than 60 days)" in out
    with Store(store_url) as store:
        assert store.count("readings") == 1 and store.count("results") == 3


async def test_daemon_purge_task_applies_the_plant_file(store_url: str, tmp_path: Path) -> None:
    from daemon.runtime import Runtime

    plant = load_plant(
        _plant(tmp_path, "retention_days = 60\nreadings_retention_days = 5\n", url=store_url)
    )
    now = time.time()
    store = Store(store_url)
    store.upgrade()
    store.ensure_unit("KR-GT1", "gas_turbine")
    _fill(store, now)
    runtime = Runtime(plant, store=store, serve_http=False, publish=False, clock=lambda: now)
    task = asyncio.create_task(runtime._retention())
    try:
        deadline = time.monotonic() + 20.0
        while store.count("readings") != 1 and time.monotonic() < deadline:
            await asyncio.sleep(0.05)
    finally:
        task.cancel()
        with pytest.raises(asyncio.CancelledError):
            await task
        store.close()
    with Store(store_url) as check:
        # readings: 5 days; results, quarantine, events: retention_days = 60
        assert check.count("readings") == 1
        assert check.count("results") == 2 and check.count("quarantine") == 2
        assert check.count("events") == 2

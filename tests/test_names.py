"""One name per thing, and docs that say what the program does.

What the checks rest on:
- ``docs/glossary.md`` is the list of names (the project's rule): every result, measurement and
  parameter name used in JSON, SQL columns and metric names must be one entry there, each name
  once, and no two entries may share a symbol (two names for one quantity).
- PostgreSQL folds unquoted identifiers to lower case (PostgreSQL documentation, "Identifiers
  and Key Words"), so a mixed-case column can only be reached quoted: the schema must be lower
  case on both backends.
- Prometheus' own linter, ``promtool check metrics`` (Debian package ``prometheus``), and its
  naming practice (prometheus.io, "Metric and label naming": base units, the gram for mass).
- The docs' statements, recomputed with brayscope's own model or run as written.

The numbers of the examples are invented Kestrel Ridge demonstration data.
"""

from __future__ import annotations

import doctest
import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa
from live_support import promtool_check_metrics

import daemon
from daemon.renames import RENAMED_RESULTS
from daemon.storage import Store, schema
from models.units.registry import builtin_unit_types

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
GLOSSARY = DOCS / "glossary.md"
EXAMPLES = Path(daemon.__file__).parent / "examples"
GAS_TURBINE = builtin_unit_types()["gas_turbine"]

#: The short field keys KR-GT3's object payload used before this release.
OLD_GATEWAY_KEYS = ("T0", "P0", "RH", "T1", "P1", "TCD", "PCD", "T5", "P5", "WF", "TF", "KW")


def _tracked_text_files() -> list[Path]:
    out = subprocess.run(
        ["git", "ls-files"], cwd=ROOT, capture_output=True, text=True, check=False
    ).stdout.split()
    if not out:  # not a git checkout: every text file under the repository
        out = [str(p.relative_to(ROOT)) for p in ROOT.rglob("*") if p.is_file()]
    skip = (".png", ".pyc", ".sqlite")
    paths = [ROOT / f for f in out if not f.endswith(skip) and ".venv" not in f]
    return [p for p in paths if p.is_file() and not p.is_symlink()]


# --------------------------------------------------------------------------------------------
# The glossary
# --------------------------------------------------------------------------------------------


def _glossary_tables() -> list[tuple[str, list[str], list[list[str]]]]:
    """(section, header cells, rows) of every table of the glossary."""
    tables: list[tuple[str, list[str], list[list[str]]]] = []
    section = ""
    current: list[list[str]] | None = None
    for line in GLOSSARY.read_text(encoding="utf-8").splitlines():
        if line.startswith("## "):
            section = line[3:].strip()
        if line.startswith("|"):
            cells = [c.strip() for c in line.strip().strip("|").split("|")]
            if current is None:
                current = [cells]
            elif not set(line) <= set("|-: "):
                current.append(cells)
        elif current is not None:
            tables.append((section, current[0], current[1:]))
            current = None
    if current is not None:
        tables.append((section, current[0], current[1:]))
    return tables


def _entries() -> dict[str, list[str]]:
    """Glossary name -> the sections it is an entry of (metric table excluded)."""
    out: dict[str, list[str]] = {}
    for section, head, rows in _glossary_tables():
        if head[0] != "name":
            continue
        for row in rows:
            m = re.fullmatch(r"`([a-z0-9_]+)`", row[0])
            assert m, f"glossary {section}: entry {row[0]!r} is not one lower-case `name`"
            out.setdefault(m.group(1), []).append(section)
    return out


def test_glossary_has_one_entry_per_name_and_no_synonyms() -> None:
    entries = _entries()
    twice = {n: s for n, s in entries.items() if len(s) > 1}
    assert twice == {}, f"names with more than one glossary entry: {twice}"
    # a symbol names one quantity: two entries with the same symbol would be synonyms
    seen: dict[str, str] = {}
    for section, head, rows in _glossary_tables():
        if head[0] != "name" or "symbol" not in head:
            continue
        k = head.index("symbol")
        for row in rows:
            sym = row[k]
            if not sym:
                continue
            assert sym not in seen, f"symbol {sym} of {row[0]} is also {seen[sym]} ({section})"
            seen[sym] = row[0]
    # no old (renamed) name is an entry
    assert not set(RENAMED_RESULTS) & set(entries)


def _metric_suffix(result: str) -> str:
    unit = next(f.unit for f in GAS_TURBINE.results if f.name == result)
    if result.endswith(("_kj_per_kwh", "_ratio")):
        return ""
    return {"1": "_ratio", "K": "_kelvin", "W": "_watts", "kg/s": "_grams_per_second"}[unit]


def test_every_name_of_json_sql_and_metrics_maps_to_one_glossary_entry() -> None:
    from daemon.calc import calculate
    from daemon.contract import parse_document
    from daemon.http import ResultOut, TrendFitOut, TrendOut
    from daemon.metrics import KPI_GAUGES
    from daemon.runtime import row_to_api

    entries = _entries()

    def known(names: set[str], where: str) -> None:
        missing = sorted(n for n in names if n not in entries)
        assert missing == [], f"{where}: not in docs/glossary.md: {missing}"

    # the unit type's own schema
    known({f.name for f in GAS_TURBINE.measurements}, "measurements")
    known({f.name for f in GAS_TURBINE.parameters}, "parameters")
    known({f.name for f in GAS_TURBINE.results}, "results")

    # SQL: every column of results (inputs without their prefix) and of events
    cols = set(schema.results.c.keys()) - {"unit", "created_at"}
    known({c.removeprefix(schema.INPUT_PREFIX) for c in cols}, "SQL results")
    known(set(schema.events.c.keys()) - {"id", "ts"}, "SQL events")

    # JSON: brayscope calc output, the API's result object, the trend report
    text = (EXAMPLES / "kr-gt1-snapshot.json").read_text(encoding="utf-8")
    (out,) = calculate(parse_document(text), builtin_unit_types())
    doc = out.to_json()
    known(set(doc) - {"record", "line", "id", "unit_type", "status"}, "calc output")
    known(set(doc["status"]) - {"errors"}, "calc status")
    known(set(ResultOut.model_fields) - {"unit", "ts_epoch_s", "labels", "results", "inputs"},
          "API result")  # fmt: skip
    row = {"unit": "KR-GT1", "ts": __import__("datetime").datetime.now(), "status": 0}
    api = row_to_api(row)
    known(set(api["results"]) | set(api["inputs"]) | set(api["labels"]), "API result keys")
    rates = {k for k in TrendFitOut.model_fields if k.endswith("_per_1000h")}
    known(rates | {"fired_hours", "bin_h", "max_gap_s", "fired_hours_at_start"}, "trend")
    assert {"fired_hours", "bin_h", "max_gap_s", "fired_hours_at_start"} <= set(
        TrendOut.model_fields
    )

    # metrics: brayscope_ + result + base-unit suffix, and the glossary's metric table says so
    for g in KPI_GAUGES:
        known({g.result}, g.metric)
        assert g.metric == "brayscope_" + g.result + _metric_suffix(g.result), g.metric
    table = next(rows for sec, head, rows in _glossary_tables() if head[0] == "metric")
    documented = {r[0].strip("`"): r[1].split("`")[1] for r in table}
    expected = {g.metric: g.result for g in KPI_GAUGES}
    expected |= {"brayscope_steady_state": "steady_state", "brayscope_result_valid": "valid"}
    assert documented == expected

    # and no old name survives in what we emit
    emitted = set(doc) | cols | {g.metric for g in KPI_GAUGES} | set(api["results"])
    assert not {o for o in RENAMED_RESULTS if any(o in e for e in emitted)}


def test_no_key_of_the_old_gateway_set_remains_anywhere() -> None:
    # keys as plant-file tag keys anywhere, and the key-only spellings (not glossary symbols)
    # as words anywhere but the changelog that lists the rename
    old = "|".join(OLD_GATEWAY_KEYS)
    tag_key = re.compile(r"""key\s*=\s*\\?["'](""" + old + r""")\\?["']""")
    words = re.compile(r"\b(TCD|PCD|T5|P5|WF|TF|KW)\b")
    object_key = re.compile(r"""["'](""" + old + r""")["']\s*:""")
    hits = []
    for path in _tracked_text_files():
        rel = path.relative_to(ROOT).as_posix()
        if rel in ("CHANGELOG.md", "tests/test_names.py") or not path.exists():
            continue
        try:
            text = path.read_text(encoding="utf-8")
        except UnicodeDecodeError:
            continue
        hits += [f"{rel}: {m.group(0)}" for m in tag_key.finditer(text)]
        hits += [f"{rel}: {m.group(0)}" for m in words.finditer(text)]
        if rel.startswith(("daemon/examples/", "docs/")) or rel == "daemon/simulator.py":
            hits += [f"{rel}: {m.group(0)}" for m in object_key.finditer(text)]
    assert hits == []
    plant = (EXAMPLES / "kestrel-ridge.toml").read_text(encoding="utf-8")
    keys = re.findall(r'^\s*key = "([^"]+)"', plant, flags=re.MULTILINE)
    assert len(keys) == 12 and not set(keys) & set(OLD_GATEWAY_KEYS), keys


# --------------------------------------------------------------------------------------------
# SQL: lower case on SQLite and PostgreSQL
# --------------------------------------------------------------------------------------------


def test_sql_schema_has_no_mixed_case_identifier(store_url: str) -> None:
    st = Store(store_url)
    try:
        st.upgrade()
        with st.engine.connect() as conn:
            insp = sa.inspect(conn)
            names: list[str] = []
            for table in insp.get_table_names():
                names.append(table)
                names += [c["name"] for c in insp.get_columns(table)]
                names += [i["name"] for i in insp.get_indexes(table) if i["name"]]
                pk = insp.get_pk_constraint(table).get("name")
                names += [pk] if pk else []
            bad = [n for n in names if n != n.lower()]
            assert bad == [], f"mixed-case identifiers: {bad}"
            assert "heat_rate_lhv_kj_per_kwh" in names and "steady_state" in names
            # hand-written SQL without quotes reaches every heat-rate column
            conn.execute(
                sa.text(
                    "SELECT heat_rate_lhv_kj_per_kwh, heat_rate_hhv_kj_per_kwh, "
                    "corrected_heat_rate_lhv_kj_per_kwh, steady_state FROM results"
                )
            ).all()
    finally:
        st.close()


def test_upgrade_from_0002_renames_columns_and_rewrites_operator_events(store_url: str) -> None:
    from alembic import command

    st = Store(store_url)
    try:
        st.upgrade("0002")
        with st.engine.begin() as conn:
            conn.execute(
                sa.text(
                    "INSERT INTO units (name, unit_type, updated_at) "
                    "VALUES ('KR-GT2', 'gas_turbine', '2026-06-01 00:00:00+00')"
                )
            )
            conn.execute(
                sa.text(
                    'INSERT INTO results (unit, ts, status, steady, "heat_rate_kJ_per_kWh", '
                    "created_at) VALUES ('KR-GT2', '2026-06-01 00:00:00+00', 0, true, 10600.5, "
                    "'2026-06-01 00:00:00+00')"
                )
            )
            detail = json.dumps({"unit": "KR-GT2", "text": "offline wash", "source": "api"})
            conn.execute(
                sa.text(
                    "INSERT INTO events (ts, kind, detail) VALUES "
                    "('2026-06-01 00:00:00+00', 'operator_wash', :d), "
                    "('2026-06-01 00:00:00+00', 'start', 'brayscope 0.1.0')"
                ),
                {"d": detail},
            )
        st.upgrade()
        with st.engine.connect() as conn:
            assert conn.execute(
                sa.text("SELECT steady_state, heat_rate_lhv_kj_per_kwh FROM results")
            ).one() == (True, 10600.5)
            events = conn.execute(
                sa.text("SELECT source, kind, unit, detail FROM events ORDER BY id")
            ).all()
        assert [tuple(e) for e in events] == [
            ("operator", "wash", "KR-GT2", "offline wash"),
            ("daemon", "start", None, "brayscope 0.1.0"),
        ]
        command.downgrade(st.alembic_config(), "0002")  # and back, data intact
        with st.engine.connect() as conn:
            assert conn.execute(sa.text('SELECT "heat_rate_kJ_per_kWh" FROM results')).one() == (
                10600.5,
            )
            kinds = conn.execute(sa.text("SELECT kind FROM events ORDER BY id")).scalars().all()
        assert kinds == ["operator_wash", "start"]
    finally:
        st.close()


# --------------------------------------------------------------------------------------------
# Metrics: promtool on a scrape
# --------------------------------------------------------------------------------------------


def test_promtool_check_metrics_passes_on_a_scrape() -> None:
    import asyncio

    import httpx
    from live_support import free_port
    from prometheus_client import CollectorRegistry

    from daemon.calc import calculate
    from daemon.contract import parse_document
    from daemon.http import create_app, serve
    from daemon.metrics import Metrics

    units = ["KR-GT1", "KR-GT2", "KR-GT3"]
    metrics = Metrics(CollectorRegistry(), units, site="Kestrel Ridge Energy Park", version="0")
    text = (EXAMPLES / "kr-gt1-snapshot.json").read_text(encoding="utf-8")
    (res,) = calculate(parse_document(text), builtin_unit_types())
    values = {k: (np.nan if v is None else v) for k, v in res.results.items()}
    metrics.observe_result("KR-GT1", 1.78e9, values, 0, valid=True, steady_state=True)
    metrics.observe_result("KR-GT2", 1.78e9, {}, 1 << 3, valid=False, steady_state=None)
    metrics.readings_rejected("out_of_range", 2)
    metrics.committed(5, 0.01)

    class Backend:
        site = "Kestrel Ridge Energy Park"

        def units_info(self) -> list[dict[str, str]]:
            return [{"name": u, "unit_type": "gas_turbine"} for u in units]

        def metrics_text(self) -> bytes:
            return metrics.render()

    async def scrape_over_http() -> httpx.Response:
        # the daemon's own HTTP server on a loopback socket, scraped as Prometheus would
        port, stop, up = free_port(), asyncio.Event(), asyncio.Event()

        async def started() -> None:
            up.set()

        app = create_app(Backend())  # type: ignore[arg-type]
        task = asyncio.create_task(serve(app, "127.0.0.1", port, started=started, stop=stop))
        await asyncio.wait_for(up.wait(), 10)
        async with httpx.AsyncClient() as client:
            r = await client.get(f"http://127.0.0.1:{port}/metrics")
        stop.set()
        await task
        return r

    scrape = asyncio.run(scrape_over_http())
    assert scrape.status_code == 200
    assert "brayscope_heat_rate_lhv_kj_per_kwh" in scrape.text
    if not promtool_check_metrics(scrape.text):
        pytest.skip("promtool not installed (Debian package prometheus); lint not run")


# --------------------------------------------------------------------------------------------
# The command line: every --help ends with examples
# --------------------------------------------------------------------------------------------


def test_every_command_help_ends_with_examples() -> None:
    from daemon.cli import COMMANDS, build_parser

    parser = build_parser()
    subs = next(a for a in parser._actions if a.dest == "command").choices
    helps = {"brayscope": parser.format_help()}
    helps |= {f"brayscope {name}": subs[name].format_help() for name in COMMANDS}
    for name, text in helps.items():
        last = text.rstrip().split("\n\n")[-1].splitlines()
        assert last[0] == "examples:", f"{name} --help does not end with examples: {last[:2]}"
        commands = [ln for ln in last[1:] if ln.lstrip().startswith(("brayscope", "BRAYSCOPE_"))]
        assert len(commands) >= 2, f"{name}: fewer than two examples"


# --------------------------------------------------------------------------------------------
# Old names are accepted for one release, with a warning
# --------------------------------------------------------------------------------------------


def test_plant_file_with_old_names_loads_and_says_what_to_write(tmp_path: Path, capsys) -> None:
    from daemon.cli import main
    from daemon.config import load_plant

    text = (EXAMPLES / "kestrel-ridge.toml").read_text(encoding="utf-8")
    text = text.replace('unit_type = "gas_turbine"', 'type = "gas_turbine"', 1)
    text = text.replace("corrected_heat_rate_lhv_kj_per_kwh = 10250",
                        "corrected_heat_rate_kJ_per_kWh = 10250")  # fmt: skip
    text = text.replace("[daemon]\n", "[daemon]\nsteady_window = 30\n")
    path = tmp_path / "old.toml"
    path.write_text(text, encoding="utf-8")
    plant = load_plant(path)
    gt1 = plant.units["KR-GT1"]
    assert gt1.unit_type == "gas_turbine"
    assert gt1.baseline["corrected_heat_rate_lhv_kj_per_kwh"] == 10250
    found = {(i.key_path, i.fix) for i in plant.deprecations}
    assert found == {
        ("units.KR-GT1.type", "rename it to 'unit_type'"),
        (
            "units.KR-GT1.baseline.corrected_heat_rate_kJ_per_kWh",
            "rename it to 'corrected_heat_rate_lhv_kj_per_kwh'",
        ),
        ("daemon.steady_window", "delete this line (it is refused from the next release)"),
    }
    assert main(["check", "-c", str(path)]) == 0
    err = capsys.readouterr().err
    assert err.count("warning: ") == 3 and "units.KR-GT1.type" in err


def test_calc_accepts_the_old_timestamp_key_and_unit_option_with_a_warning(capsys) -> None:
    from daemon.cli import main

    rec = json.loads((EXAMPLES / "kr-gt1-snapshot.json").read_text(encoding="utf-8"))
    rec["timestamp"] = rec.pop("ts")
    path = Path(os.environ.get("TMPDIR", "/tmp")) / f"brayscope-old-{os.getpid()}.json"
    path.write_text(json.dumps(rec), encoding="utf-8")
    try:
        code = main(["calc", str(path), "--unit", "gas_turbine"])
    finally:
        path.unlink()
    cap = capsys.readouterr()
    doc = json.loads(cap.out)
    assert code == 0 and doc["ts"] == "2026-06-14T10:00:00Z" and doc["status"]["valid"]
    assert "'timestamp' is a deprecated name: use 'ts'" in cap.err
    assert "'--unit' is a deprecated name: use '--unit-type'" in cap.err


# --------------------------------------------------------------------------------------------
# The docs say what the program does
# --------------------------------------------------------------------------------------------


def _blocks(path: Path, lang: str) -> list[str]:
    return re.findall(rf"```{lang}\n(.*?)```", path.read_text(encoding="utf-8"), flags=re.S)


def test_calc_md_commands_run_as_written(tmp_path: Path) -> None:
    (console,) = _blocks(DOCS / "calc.md", "console")
    commands = [ln[2:].split("#")[0].strip() for ln in console.splitlines() if ln.startswith("$ ")]
    assert len(commands) == 6
    shutil.copy(EXAMPLES / "kestrel-ridge-batch.jsonl", tmp_path / "day.jsonl")
    env = {**os.environ, "PATH": f"{Path(sys.executable).parent}:{os.environ.get('PATH', '')}"}
    for cmd in commands:
        proc = subprocess.run(
            ["bash", "-o", "pipefail", "-c", cmd],
            cwd=tmp_path, env=env, capture_output=True, text=True, timeout=120, check=False,
        )  # fmt: skip
        assert proc.returncode == 0, (cmd, proc.stderr[-2000:])
        assert proc.stdout or (tmp_path / "results.jsonl").exists(), cmd
    results = (tmp_path / "results.jsonl").read_text().splitlines()
    assert len(results) == len((tmp_path / "day.jsonl").read_text().splitlines())


def test_calc_md_example_record_messages_and_keys_are_the_shipped_ones() -> None:
    from daemon.contract import contract_for

    calc_md = DOCS / "calc.md"
    record = json.loads(_blocks(calc_md, "json")[0])
    assert record == json.loads((EXAMPLES / "kr-gt1-snapshot.json").read_text())
    # the top-level keys table lists exactly the record's keys
    text = calc_md.read_text(encoding="utf-8")
    section = text.split("### Top-level keys")[1].split("###")[0]
    keys = set(re.findall(r"^\| `([a-z_]+)` \|", section, flags=re.M))
    assert keys == set(contract_for(GAS_TURBINE).record.model_fields)
    # the rejection messages are those of the shipped mistakes
    (shown,) = _blocks(calc_md, "text")
    proc = subprocess.run(
        [sys.executable, "-m", "daemon.cli", "calc", str(EXAMPLES / "kestrel-ridge-errors.json")],
        capture_output=True, text=True, timeout=120, check=False, cwd=ROOT,
    )  # fmt: skip
    assert proc.returncode == 1
    for line in shown.strip().splitlines():
        assert line in proc.stderr.splitlines(), line


def test_calc_md_degrees_celsius_claim_is_what_validation_does() -> None:
    from daemon.contract import RecordRef, validate_record

    rec = json.loads((EXAMPLES / "kr-gt1-snapshot.json").read_text())

    def errors(**meas: float) -> list[str]:
        r = json.loads(json.dumps(rec))
        r["measurements"].update(meas)
        out = validate_record(RecordRef(1), r, builtin_unit_types())
        return [str(e) for e in out] if isinstance(out, list) else []

    # cold temperatures in degC fall below the kelvin floor: caught
    assert any("ambient_temperature" in e for e in errors(ambient_temperature=18.3))
    assert any("fuel_temperature" in e for e in errors(fuel_temperature=31.85))
    # a hot-section temperature in degC lies inside the kelvin range: not caught (the doc says so)
    assert errors(compressor_discharge_temperature=400.0, exhaust_temperature=550.0) == []
    assert "is **not** caught" in (DOCS / "calc.md").read_text(encoding="utf-8")


def _kr_gt1(**changes: float) -> dict[str, float]:
    from models.properties.fuel import gas_fuel
    from models.units.gas_turbine.reconstruct import reconstruct

    rec = json.loads((EXAMPLES / "kr-gt1-snapshot.json").read_text())
    meas = {k: np.array([v]) for k, v in rec["measurements"].items()}
    for k, v in changes.items():
        if v is None:
            del meas[k]
        else:
            meas[k] = np.array([v])
    out = reconstruct(**meas, fuel=gas_fuel(rec["fuel"]["composition"]), **rec["parameters"])
    assert not out.status.any()
    return {k: float(v[0]) for k, v in out.values.items()}


def test_method_md_kestrel_ridge_figures_are_recomputed() -> None:
    text = (DOCS / "method.md").read_text(encoding="utf-8")
    r = _kr_gt1()
    for name, shown in (
        ("ideal_brayton_efficiency", "0.5387"),
        ("ideal_cycle_efficiency", "0.5068"),
        ("carnot_efficiency", "0.7911"),
        ("thermal_efficiency", "0.3444"),
    ):
        assert f"{r[name]:.4f}" == shown and f"| {shown} |" in text, name
    assert f"η_c = {r['compressor_isentropic_efficiency']:.3f}" in text
    assert f"T2s = {r['compressor_isentropic_discharge_temperature']:.1f} K" in text
    T1, T2, pr = 291.05, 670.0, r["compressor_pressure_ratio"]
    t2s = T1 * pr ** (0.4 / 1.4)  # constant gamma = 1.4, the cold-air shortcut
    assert f"T2s = {t2s:.1f} K and η_c = {(t2s - T1) / (T2 - T1):.3f}" in text
    assert f"KR-GT1: {r['heat_rate_lhv_kj_per_kwh']:,.0f}".replace(",", " ") in text
    assert "not the SAE AS755 numbering" in text and "AS755-style" not in text


def test_validity_md_fuel_preheat_figures_are_recomputed() -> None:
    from models.properties.fuel import gas_fuel

    text = (DOCS / "validity.md").read_text(encoding="utf-8")
    rec = json.loads((EXAMPLES / "kr-gt1-snapshot.json").read_text())
    fuel = gas_fuel(rec["fuel"]["composition"])
    hf = float(fuel.sensible_enthalpy(np.array([453.15]))[0])  # 180 degC
    hot = _kr_gt1(fuel_temperature=453.15)
    assumed = _kr_gt1(fuel_temperature=None)  # not measured: 25 degC
    ma, ma0 = hot["air_mass_flow"], assumed["air_mass_flow"]
    figures = (
        f"LHV {fuel.lhv / 1e6:.2f} MJ/kg",
        f"{hf / 1e3:.0f} kJ/kg, {100 * hf / fuel.lhv:.2f} % of the",
        f"{100 * (1 - ma0 / ma):.2f} % low ({ma0:.1f} instead of {ma:.1f} kg/s)",
        f"temperature {assumed['turbine_inlet_temperature'] - hot['turbine_inlet_temperature']:.1f} K high",
        f"η_t {100 * (assumed['turbine_isentropic_efficiency'] - hot['turbine_isentropic_efficiency']):.2f} points high",
    )  # fmt: skip
    flat = " ".join(text.split())
    for f in figures:
        assert f in flat, f
    assert assumed["heat_rate_lhv_kj_per_kwh"] == hot["heat_rate_lhv_kj_per_kwh"]
    assert "about 0.5 %" not in text


def test_glossary_and_method_state_one_humidity_convention_below_freezing() -> None:
    from models.properties import humid_air
    from models.properties.species import INDEX

    glossary = " ".join(GLOSSARY.read_text(encoding="utf-8").split())
    method = " ".join((DOCS / "method.md").read_text(encoding="utf-8").split())
    assert "with respect to liquid water at and above 273.16 K, to ice below" in glossary
    assert "RH is therefore taken with respect to ice below the triple point" in method
    assert "over liquid water)" not in glossary
    # and the model does so: below 273.16 K the saturation pressure is the ice branch, which
    # is below the (extrapolated) liquid one (IAPWS: sublimation < vaporisation below 0 degC)
    x, _ = humid_air.humid_air(263.15, 101325.0, 1.0)
    p_w = float(x[INDEX["H2O"]]) * 101325.0 / float(humid_air.enhancement_factor(263.15, 101325.0))
    assert p_w == pytest.approx(float(humid_air.saturation_pressure(263.15)), rel=1e-9)
    assert 255.0 < p_w < 265.0  # about 260 Pa over ice at -10 degC (from memory; water: 286)


def test_markdown_tables_have_no_text_glued_to_a_row() -> None:
    for path in [*DOCS.glob("*.md"), ROOT / "README.md", ROOT / "DEVELOPERS.md"]:
        for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            if line.startswith("|"):
                assert line.rstrip().endswith("|"), f"{path.name}:{n}: text after a table row"


def test_storage_md_lists_every_migration() -> None:
    revisions = sorted(
        p.stem.split("_")[0] for p in (ROOT / "daemon/migrations/versions").glob("0*.py")
    )
    text = (DOCS / "storage.md").read_text(encoding="utf-8")
    listed = sorted(r.split("_")[0] for r in re.findall(r"^\| (0\d{3}\w*) \|", text, flags=re.M))
    assert listed == revisions


def test_readme_claims() -> None:
    readme = " ".join((ROOT / "README.md").read_text(encoding="utf-8").split())
    assert "each command's `--help` ends with examples" in readme
    assert "all corrected to ISO reference conditions" not in readme
    assert "with power and heat rate also corrected to ISO reference conditions" in readme
    corrected = {f.name for f in GAS_TURBINE.results if f.name.startswith("corrected_")}
    assert all(("power" in n) or ("heat_rate" in n) for n in corrected)


def test_developers_md_layout_names_every_module_and_nothing_else() -> None:
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    layout = text.split("## Layout")[1].split("```")[1]
    listed: set[str] = set()
    # folders nest by indentation: a line whose first word is "name/" opens that folder for
    # the lines indented deeper below it ("models/" > "  properties/" > "    species.py")
    folders: list[tuple[int, str]] = []
    for line in layout.splitlines():
        if not line.strip():
            continue
        indent = len(line) - len(line.lstrip())
        while folders and folders[-1][0] >= indent:
            folders.pop()
        parent = folders[-1][1] if folders else ""
        if not indent:  # a top-level folder; the rest of its line is prose
            top = line.split()[0]
            listed.add(top.rstrip("/"))
            folders.append((indent, top))
            continue
        for n, raw in enumerate(line.split()):
            tok = raw.strip("`(),")
            if re.fullmatch(r"[a-z_0-9]+(\.py|\.html|/)", tok):
                listed.add(f"{parent}{tok}".rstrip("/"))
                if n == 0 and tok.endswith("/"):
                    folders.append((indent, f"{parent}{tok}"))
    for p in sorted(listed):
        assert (ROOT / p).exists(), f"DEVELOPERS.md names {p}, which does not exist"
    # every module of models (at any depth) and of daemon's top level is named
    modules = {p.relative_to(ROOT).as_posix() for p in (ROOT / "models").rglob("*.py")}
    modules |= {f"daemon/{p.name}" for p in (ROOT / "daemon").glob("*.py")}
    modules = {m for m in modules if not m.endswith("__init__.py")}
    assert sorted(modules - listed) == [], "modules missing from DEVELOPERS.md's layout"
    for name in ("RESULT_VALUE_COLUMNS", "RESULT_INPUT_COLUMNS"):
        assert hasattr(schema, name) and name in text
    assert "deployment notes" not in text


def test_demo_table_fits_80_columns_and_explains_its_abbreviations() -> None:
    import io
    from datetime import UTC, datetime

    from rich.console import Console

    from daemon.demo_cmd import LEGEND, SummaryRow, render_table, summary_row

    row = {
        "ts": datetime(2026, 6, 14, 10, 0, tzinfo=UTC),
        "in_generator_power": 44.4e6,
        "compressor_isentropic_efficiency": 0.870031,
        "turbine_isentropic_efficiency": 0.879876,
        "turbine_inlet_temperature": 1393.11,
        "heat_rate_lhv_kj_per_kwh": 10453.25,
        "corrected_power": 45.52e6,
        "steady_state": None,
        "status": 0,
        "reasons": "",
    }
    rows = [summary_row("KR-GT1", row), summary_row("KR-GT3", None)]
    assert rows[0].eta_c == "87.00" and rows[0].eta_t == "87.99"  # per cent, two decimals
    assert rows[0].steady_state == "undecided" and rows[0].status == "valid"
    buf = io.StringIO()
    Console(file=buf, width=80, force_terminal=False).print(render_table(rows, "t", LEGEND))
    assert max(len(x) for x in buf.getvalue().splitlines()) <= 80
    for word in ("η_c", "η_t", "TIT", "heat rate at LHV", "corrected power", "steady state"):
        assert word in LEGEND, word
    headers = " ".join(SummaryRow.HEADERS)
    assert "HR" not in headers.split() and "corr MW" not in headers
    assert "TIT °C\n(heat\nbalance)" in headers
    line = rows[0].line()
    assert "TIT (heat balance) 1120 degC" in line and "compressor efficiency 87.00 %" in line


# models/ docstring examples are collected by pytest itself (pyproject: --doctest-modules)
@pytest.mark.parametrize("module", ["daemon.renames", "daemon.trend_cmd"])
def test_docstring_examples_run(module: str) -> None:
    mod = __import__(module, fromlist=["_"])
    result = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 0 and result.failed == 0


def test_station_numbering_is_named_in_fields_output_and_metric_help(capsys) -> None:
    from daemon.cli import main
    from daemon.metrics import KPI_GAUGES

    assert main(["calc", "--fields"]) == 0
    out = capsys.readouterr().out
    assert "stations (brayscope numbering; SAE AS755 number in brackets)" in out
    assert "1 compressor inlet [2], 2 compressor discharge [3]" in out
    assert "T1, station 1" in out and "T4, station 4" in out
    helps = {g.result: g.help for g in KPI_GAUGES}
    for result in ("compressor_pressure_ratio", "turbine_isentropic_efficiency"):
        assert "brayscope stations" in helps[result], result
    assert "AS755-style" not in (DOCS / "method.md").read_text(encoding="utf-8")

"""``brayscope calc`` end to end: input shapes, rejections, exit codes, output formats, batching.

Sources of the check values (named again beside each check):

* ISO 6976:2016, Table A.4 (ideal-gas gross molar heating value of methane at 25 °C,
  890.58 kJ/mol) and L°(25 °C) = 44.013 kJ/mol for the water formed (clause 5 / Table A.5, as
  quoted in models/properties/fuel.py); methane molar mass 16.04246 g/mol (ISO 6976:2016 Table A.1 atomic
  masses C 12.0107, H 1.00794).  Net = 890.58 − 2 · 44.013 = 802.554 kJ/mol → 50.027 MJ/kg.
* Heat rate HR = 3600 · m_f · LHV / P_gen [kJ/kWh] and η_th = P_gen / (m_f · LHV): the trade's
  definitions (ISO 2314:2009 clause 3 terms; common practice).
* Plausible bands (common practice): heavy-duty compressor isentropic efficiency 0.84–0.89,
  simple-cycle heat rate 8 600–11 000 kJ/kWh.
* °C = K − 273.15 and 1 bar = 1e5 Pa (SI Brochure, 9th ed., 2019, 2.3.1 and table 8).
* RFC 8259 section 6: NaN and Infinity are not JSON.
"""

from __future__ import annotations

import io
import json
import re
import subprocess
import sys
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from daemon import calc
from daemon.cli import build_parser, main
from models.units.base import ComputeOutput, UnitType
from models.units.registry import builtin_unit_types

GT = builtin_unit_types()["gas_turbine"]
RESULT_NAMES = [s.name for s in GT.results]
EXAMPLES = {name: Path(str(calc.example_path(name))) for name in calc.EXAMPLES}


def cli(
    argv: list[str],
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch | None = None,
    stdin: str | None = None,
) -> tuple[int, str, str]:
    if stdin is not None:
        assert monkeypatch is not None
        monkeypatch.setattr(sys, "stdin", io.StringIO(stdin))
    rc = main(["calc", *argv])
    out, err = capsys.readouterr()
    return rc, out, err


def snapshot() -> dict[str, Any]:
    value: dict[str, Any] = json.loads(EXAMPLES["kr-gt1-snapshot.json"].read_text())
    return value


# ------------------------------------------------------------------------------------------
# The shipped examples
# ------------------------------------------------------------------------------------------


def test_shipped_examples_exist_as_package_data() -> None:
    for name, path in EXAMPLES.items():
        assert path.is_file(), name


def test_example_snapshot_computes_ok_and_plausibly(capsys: pytest.CaptureFixture[str]) -> None:
    rc, out, err = cli([str(EXAMPLES["kr-gt1-snapshot.json"])], capsys)
    assert rc == calc.EXIT_OK, err
    doc = json.loads(out)
    assert isinstance(doc, dict)  # one object in, one object out
    assert doc["status"] == {"valid": True, "reasons": [], "warnings": [], "errors": []}
    assert doc["id"] == "KR-GT1 2026-06-14T10:00Z"
    assert doc["ts"] == "2026-06-14T10:00:00Z"
    assert [
        k for k in doc if k in RESULT_NAMES
    ] == RESULT_NAMES  # every result field, in the unit type's order
    r = doc
    # common practice: heavy-duty compressor isentropic efficiency 0.84-0.89
    assert 0.84 <= r["compressor_isentropic_efficiency"] <= 0.89
    # common practice: simple-cycle heat rate 8 600-11 000 kJ/kWh
    assert 8600.0 <= r["heat_rate_lhv_kj_per_kwh"] <= 11000.0
    # ISO 2314 / common practice: HR = 3600 m_f LHV / P and eta_th = P / (m_f LHV) agree
    assert r["heat_rate_lhv_kj_per_kwh"] * r["thermal_efficiency"] == pytest.approx(
        3600.0, rel=1e-9
    )
    m = snapshot()["measurements"]
    assert r["compressor_pressure_ratio"] == pytest.approx(
        m["compressor_discharge_pressure"] / m["compressor_inlet_pressure"], rel=1e-12
    )
    assert doc["air_mass_flow_source"] == "heat_balance"  # no air flow measured
    assert doc["correction_method"] in ("model", "curve")


def test_pure_methane_heat_rate_matches_iso6976(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    rec = snapshot()
    rec["fuel"] = {"composition": {"CH4": 1.0}}
    rc, out, _ = cli(["-"], capsys, monkeypatch, json.dumps(rec))
    r = json.loads(out)
    # ISO 6976:2016 Table A.4: CH4 gross 890.58 kJ/mol at 25 °C; net = gross - 2 * 44.013 kJ/mol;
    # M(CH4) = 16.04246 g/mol (ISO 6976 atomic masses)  ->  LHV = 50.027 MJ/kg
    lhv = (890.58 - 2 * 44.013) / 16.04246e-3 * 1e3
    m = rec["measurements"]
    expected_hr = 3600.0 * m["fuel_mass_flow"] * lhv / m["generator_power"]  # kJ/kWh
    # tolerance: ISO 6976 gives the heating value to 0.01 kJ/mol (1e-5 relative)
    assert r["heat_rate_lhv_kj_per_kwh"] == pytest.approx(expected_hr, rel=5e-5)
    assert r["heat_input"] == pytest.approx(m["fuel_mass_flow"] * lhv, rel=5e-5)
    assert rc in (calc.EXIT_OK, calc.EXIT_INVALID)


def test_example_flag_prints_the_shipped_json_and_it_pipes(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    rc, out, _ = cli(["--example"], capsys)
    assert rc == 0
    assert json.loads(out) == snapshot()
    rc, out2, err = cli(["-", "-f", "jsonl"], capsys, monkeypatch, out)
    assert rc == 0, err
    lines = out2.splitlines()
    assert len(lines) == 1
    assert json.loads(lines[0])["status"]["valid"] is True


def test_list_examples_names_existing_paths(capsys: pytest.CaptureFixture[str]) -> None:
    rc, out, _ = cli(["--list-examples"], capsys)
    assert rc == 0
    for path in EXAMPLES.values():
        assert str(path) in out


def test_liquid_fuel_example_uses_the_curves(capsys: pytest.CaptureFixture[str]) -> None:
    rc, out, err = cli([str(EXAMPLES["kr-gt3-liquid-fuel.json"])], capsys)
    assert rc == 0, err
    doc = json.loads(out)
    assert doc["status"]["valid"] is True
    assert doc["correction_method"] == "curve"
    r = doc
    m = json.loads(EXAMPLES["kr-gt3-liquid-fuel.json"].read_text())["measurements"]
    # HR = 3600 m_f LHV / P with the given LHV (common practice definition)
    assert r["heat_rate_lhv_kj_per_kwh"] == pytest.approx(
        3600.0 * m["fuel_mass_flow"] * 42.8e6 / m["generator_power"], rel=1e-9
    )
    assert r["corrected_power_curve"] is not None


def test_batch_example_jsonl_in_jsonl_out(capsys: pytest.CaptureFixture[str]) -> None:
    path = EXAMPLES["kestrel-ridge-batch.jsonl"]
    rc, out, err = cli([str(path)], capsys)
    assert rc == 0, err
    ids_in = [json.loads(line)["id"] for line in path.read_text().splitlines() if line.strip()]
    docs = [json.loads(line) for line in out.splitlines()]
    assert [d["id"] for d in docs] == ids_in
    assert [d["line"] for d in docs] == list(range(1, len(ids_in) + 1))
    assert all(d["status"]["valid"] for d in docs)
    for d in docs:
        assert 0.84 <= d["compressor_isentropic_efficiency"] <= 0.89  # common practice
        assert 8600.0 <= d["heat_rate_lhv_kj_per_kwh"] <= 11000.0  # common practice


def test_errors_example_reports_each_mistake(capsys: pytest.CaptureFixture[str]) -> None:
    rc, out, err = cli([str(EXAMPLES["kestrel-ridge-errors.json"])], capsys)
    assert rc == calc.EXIT_INVALID
    docs = json.loads(out)
    assert isinstance(docs, list)
    assert [d["status"]["valid"] for d in docs] == [True] + [False] * (len(docs) - 1)
    expected_paths = [
        "measurements.compressor_discharge_pressure: must be > compressor_inlet_pressure",
        "measurements: unknown key 'compressor_discharge_temp'",
        "measurements.ambient_relative_humidity: must be within 0..1",
        "measurements.generator_power: must be a number (got a string '44.4e6')",
        "measurements.compressor_inlet_temperature: must be",
        "fuel.composition.C2H4: unknown species 'C2H4'",
        "measurements.compressor_discharge_temperature: must be > compressor_inlet_temperature",
    ]
    for i, (doc, expected) in enumerate(zip(docs[1:], expected_paths, strict=True), start=2):
        assert any(e.startswith(expected) for e in doc["status"]["errors"]), doc["status"]
        assert all(doc[n] is None for n in RESULT_NAMES)
        assert re.search(rf"^record {i} \(id .*\): {re.escape(expected)}", err, re.M), err


# ------------------------------------------------------------------------------------------
# Mixed input, stdin, NaN, formats, output file
# ------------------------------------------------------------------------------------------


def test_mixed_list_keeps_order_and_computes_the_good_ones(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    good = snapshot()
    bad_p = snapshot()
    bad_p["id"] = "bad pressure"
    bad_p["measurements"]["compressor_inlet_pressure"] = 101325.0
    bad_p["measurements"]["compressor_discharge_pressure"] = 101000.0
    other = snapshot()
    other["id"] = "other parameters"
    other["parameters"] = {"generator_efficiency": 0.98}
    not_obj = "just a string"
    rc, out, err = cli(["-"], capsys, monkeypatch, json.dumps([good, bad_p, other, not_obj]))
    assert rc == calc.EXIT_INVALID
    docs = json.loads(out)
    assert [d["record"] for d in docs] == [1, 2, 3, 4]
    assert [d["status"]["valid"] for d in docs] == [True, False, True, False]
    assert docs[1]["id"] == "bad pressure"
    assert docs[2]["compressor_isentropic_efficiency"] is not None
    # a lower generator efficiency means more shaft power for the same generator power
    assert docs[2]["shaft_power"] > docs[0]["shaft_power"]
    assert (
        'record 2 (id "bad pressure"): measurements.compressor_discharge_pressure: must be > '
        "compressor_inlet_pressure (got 101000 Pa ≤ 101325 Pa)" in err
    )
    assert "record 4: must be a JSON object (got a string)" in err


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity"])
def test_nan_literal_is_rejected(
    literal: str, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # RFC 8259 section 6: not JSON, although Python's json would accept it by default
    text = json.dumps(snapshot()).replace('"fuel_mass_flow": 2.7', f'"fuel_mass_flow": {literal}')
    assert literal in text
    rc, out, err = cli(["-"], capsys, monkeypatch, text)
    assert rc == calc.EXIT_INVALID
    doc = json.loads(out)  # our own output is strict JSON
    assert doc["status"]["valid"] is False
    assert all(doc[n] is None for n in RESULT_NAMES)
    assert "measurements.fuel_mass_flow: NaN/Infinity is not JSON" in err


def test_jsonl_with_a_broken_line(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    one = json.dumps(snapshot())
    rc, out, err = cli(["-"], capsys, monkeypatch, f"{one}\n\n{one[:40]}\n{one}\n")
    assert rc == calc.EXIT_INVALID
    docs = [json.loads(line) for line in out.splitlines()]
    assert [d["status"]["valid"] for d in docs] == [True, False, True]
    assert [d["line"] for d in docs] == [1, 3, 4]
    assert "record 2 (line 3): not valid JSON" in err


def test_format_json_for_jsonl_input_gives_a_list(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    one = json.dumps(snapshot())
    rc, out, _ = cli(["-", "-f", "json"], capsys, monkeypatch, f"{one}\n{one}\n")
    assert rc == 0
    assert len(json.loads(out)) == 2


def test_table_format_plain_text_engineering_units(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    two = [snapshot(), snapshot()]
    two[1]["id"] = "second"
    two[1]["measurements"]["compressor_discharge_temperature"] = 1.0  # rejected
    rc, out, _ = cli(["-", "-f", "table"], capsys, monkeypatch, json.dumps(two))
    assert rc == calc.EXIT_INVALID
    assert "\x1b[" not in out  # not a TTY: no escape codes
    assert "not a protection or control system" in out
    for unit in ("°C", "bar", "MW", "%", "kJ/kWh"):
        assert f" {unit} " in out, unit
    assert "second: error: measurements.compressor_discharge_temperature" in out
    # the turbine inlet temperature row in °C equals the JSON value in K minus 273.15
    rc, js, _ = cli(["-"], capsys, monkeypatch, json.dumps(snapshot()))
    t3 = json.loads(js)["turbine_inlet_temperature"]
    row = next(line for line in out.splitlines() if "turbine_inlet_temperature " in line)
    cells = [c.strip() for c in row.strip("|").split("|")]
    assert cells[1] == "°C"
    assert float(cells[2].replace(",", "")) == pytest.approx(t3 - 273.15, abs=0.05)
    assert cells[3] == "—"  # the rejected record
    power = next(line for line in out.splitlines() if line.startswith("| shaft_power "))
    mw = float(power.strip("|").split("|")[2].replace(",", ""))
    assert mw == pytest.approx(json.loads(js)["shaft_power"] / 1e6, abs=0.005)


def test_output_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "out.json"
    rc, out, _ = cli([str(EXAMPLES["kr-gt1-snapshot.json"]), "-o", str(target)], capsys)
    assert rc == 0
    assert out == ""
    assert json.loads(target.read_text())["status"]["valid"] is True


def test_fuel_refused_by_the_model_rejects_its_group_only(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    bad = snapshot()
    bad["fuel"] = {"composition": {"CH4": 0.90}}  # sums to 0.9: refused by models.properties.fuel
    rc, out, err = cli(["-"], capsys, monkeypatch, json.dumps([bad, snapshot()]))
    assert rc == calc.EXIT_INVALID
    docs = json.loads(out)
    assert [d["status"]["valid"] for d in docs] == [False, True]
    assert docs[0]["status"]["errors"][0].startswith("fuel")
    assert "record 1" in err


def test_record_the_model_cannot_balance_exits_1_with_its_reason(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # First law (common practice): generator power above the fuel's heat input (140 MW from
    # 2.7 kg/s of a ~47.7 MJ/kg gas, ~129 MW) admits no positive air flow in the heat balance.
    rec = snapshot()
    rec["measurements"]["generator_power"] = 140e6
    rc, out, err = cli(["-"], capsys, monkeypatch, json.dumps(rec))
    assert rc == calc.EXIT_INVALID
    doc = json.loads(out)
    assert doc["status"]["valid"] is False
    assert doc["status"]["errors"] == []  # accepted by the contract ...
    assert "energy_balance_infeasible" in doc["status"]["reasons"]  # ... refused by the model
    assert doc["air_mass_flow"] is None
    assert doc["turbine_inlet_temperature"] is None
    # the compressor needs no heat balance and is still reported
    assert doc["compressor_isentropic_efficiency"] is not None
    assert "not fully computable: energy_balance_infeasible" in err


# ------------------------------------------------------------------------------------------
# Usage errors and help
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("argv", "stdin", "message"),
    [
        ([], None, "INPUT is required"),
        (["/nonexistent/snapshots.json"], None, "cannot read"),
        (["-"], "", "the input is empty"),
        (["-"], "hello", "not valid JSON"),
        (["-"], "[1, 2", "not valid JSON"),
        (["-"], "42", "expected an object"),
        (["-", "--unit", "steam_turbine"], "{}", "unknown unit type"),
    ],
)
def test_usage_errors_exit_2(
    argv: list[str],
    stdin: str | None,
    message: str,
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    rc, out, err = cli(argv, capsys, monkeypatch, stdin)
    assert rc == calc.EXIT_USAGE
    assert message in err
    assert out == ""


def test_bad_option_exits_2(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as exc:
        main(["calc", "-", "--format", "xml"])
    assert exc.value.code == 2
    assert "invalid choice" in capsys.readouterr().err


def test_help_teaches_and_cautions(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as exc:
        main(["calc", "--help"])
    assert exc.value.code == 0
    text = " ".join(capsys.readouterr().out.split())
    for needed in (
        "brayscope calc --example | brayscope calc -",
        "--list-examples",
        "exit codes: 0 every record computed 1 some record rejected",
        "2 usage error or unreadable input",
        "not a protection or control system",
        "manufacturer's limits, site procedures, local codes and licensed engineers",
    ):
        assert needed in text, needed


def test_fields_lists_the_unit_type(capsys: pytest.CaptureFixture[str]) -> None:
    rc, out, _ = cli(["--fields"], capsys)
    assert rc == 0
    for spec in (*GT.measurements, *GT.parameters, *GT.results):
        assert f"  {spec.name} [{spec.unit}]" in out
    for spec in GT.parameters:
        if spec.default is not None:
            assert f"default {spec.default:g}" in out


# ------------------------------------------------------------------------------------------
# Batching: one compute call per group, same numbers as one record at a time
# ------------------------------------------------------------------------------------------


class CountingUnitType:
    """Wraps the real unit type and records the batch size of every compute call."""

    def __init__(self, inner: UnitType) -> None:
        self.inner = inner
        self.name = inner.name
        self.description = inner.description
        self.measurements = inner.measurements
        self.parameters = inner.parameters
        self.results = inner.results
        self.calls: list[int] = []

    def compute(
        self,
        measurements: Mapping[str, Any],
        fuel: Any,
        parameters: Mapping[str, Any],
        corrections: Any = None,
    ) -> ComputeOutput:
        self.calls.append(len(next(iter(measurements.values()))))
        return self.inner.compute(measurements, fuel, parameters, corrections)


def _run_with(unit_type: CountingUnitType, text: str, monkeypatch: pytest.MonkeyPatch) -> int:
    args = build_parser().parse_args(["calc", "-", "-f", "json"])
    monkeypatch.setattr(sys, "stdin", io.StringIO(text))
    return calc.run(args, unit_types={unit_type.name: unit_type})


def test_batch_is_computed_once_per_group_and_matches_single_records(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    text = EXAMPLES["kestrel-ridge-batch.jsonl"].read_text()
    records = [json.loads(line) for line in text.splitlines() if line.strip()]
    groups = {json.dumps(r["parameters"], sort_keys=True) for r in records}
    counting = CountingUnitType(GT)
    assert _run_with(counting, text, monkeypatch) == 0
    batch = json.loads(capsys.readouterr().out)
    assert len(counting.calls) == len(groups) == 2  # KR-GT1 and KR-GT2 parameter sets
    assert sorted(counting.calls) == sorted(
        sum(1 for r in records if json.dumps(r["parameters"], sort_keys=True) == g) for g in groups
    )
    # oracle: the same records one at a time
    for rec, got in zip(records, batch, strict=True):
        single = CountingUnitType(GT)
        assert _run_with(single, json.dumps(rec), monkeypatch) == 0
        want = json.loads(capsys.readouterr().out)
        assert single.calls == [1]
        for name in RESULT_NAMES:
            a, b = got[name], want[name]
            assert (a is None) == (b is None), name
            if a is not None:
                np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9, err_msg=name)


# ------------------------------------------------------------------------------------------
# The installed command, once, through a real pipe
# ------------------------------------------------------------------------------------------


def test_subprocess_pipe() -> None:
    example = subprocess.run(
        [sys.executable, "-m", "daemon.cli", "calc", "--example"],
        capture_output=True,
        text=True,
        check=True,
        timeout=120,
    )
    proc = subprocess.run(
        [sys.executable, "-m", "daemon.cli", "calc", "-", "-f", "jsonl"],
        input=example.stdout,
        check=False,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    (line,) = proc.stdout.splitlines()
    assert json.loads(line)["status"]["valid"] is True
    bad = subprocess.run(
        [sys.executable, "-m", "daemon.cli", "calc", "-"],
        input="{not json",
        check=False,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert bad.returncode == 2
    assert "not valid JSON" in bad.stderr

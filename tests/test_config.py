"""The plant file (daemon.config), ``brayscope check`` and ``brayscope db``.

Each error class is produced by editing the shipped Kestrel Ridge example (invented demo
site) and checked for the key path, the message and the fix.  Conversion values: gauge →
absolute is p_abs = p_gauge + p_baro (definition); 1 bar = 1e5 Pa (SI Brochure, 9th ed.);
°C → K adds 273.15 (NIST SP 811 B.9).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from daemon import cli
from daemon.config import ConfigIssue, PlantConfigError, load_plant

EXAMPLE = Path(__file__).resolve().parent.parent / "daemon" / "examples" / "kestrel-ridge.toml"
ENV_NAMES = (
    "BRAYSCOPE_DATABASE_URL",
    "BRAYSCOPE_BROKER_HOST",
    "BRAYSCOPE_BROKER_PORT",
    "BRAYSCOPE_BROKER_PASSWORD",
    "BRAYSCOPE_BROKER_PASSWORD_FILE",
    "BRAYSCOPE_HTTP_BIND",
    "BRAYSCOPE_API_TOKEN",
    "BRAYSCOPE_API_TOKEN_FILE",
    "BRAYSCOPE_API_READ_TOKEN",
    "BRAYSCOPE_API_READ_TOKEN_FILE",
)
LINE = re.compile(r"^(?P<file>[^:]+): (?:(?P<key>[^ ]+): )?(?P<msg>.+) — fix: (?P<fix>.+)$")


@pytest.fixture(autouse=True)
def _clean_env(monkeypatch: pytest.MonkeyPatch) -> None:
    for name in ENV_NAMES:
        monkeypatch.delenv(name, raising=False)


def _variant(tmp_path: Path, *edits: tuple[str, str], count: int = 1) -> Path:
    text = EXAMPLE.read_text(encoding="utf-8")
    for old, new in edits:
        assert old in text, old
        text = text.replace(old, new, count)
    path = tmp_path / "plant.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _issues(path: Path) -> list[ConfigIssue]:
    with pytest.raises(PlantConfigError) as info:
        load_plant(path)
    assert all(i.file == str(path) for i in info.value.issues if i.file != "environment")
    return info.value.issues


def _one(issues: list[ConfigIssue], key: str) -> ConfigIssue:
    hits = [i for i in issues if i.key_path == key]
    assert hits, f"no issue at {key}: {issues}"
    return hits[0]


# ----------------------------------------------------------------------------------------------
# The shipped example
# ----------------------------------------------------------------------------------------------


def test_shipped_example_validates_with_brayscope_check(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["check", "-c", str(EXAMPLE)]) == 0
    out = capsys.readouterr().out
    assert out.startswith("OK: 3 units, 38 tags, 27 subscriptions")


def test_example_content_and_converters() -> None:
    plant = load_plant(EXAMPLE)
    assert list(plant.units) == ["KR-GT1", "KR-GT2", "KR-GT3"]
    gt1, gt2, gt3 = (plant.units[n] for n in plant.units)
    cdp1 = gt1.tag_for("compressor_discharge_pressure")
    assert cdp1 is not None and cdp1.is_gauge and cdp1.baro_reference == "ambient_pressure"
    # p_abs = p_gauge + p_baro; 1 bar = 1e5 Pa
    assert cdp1.to_si(14.0, baro_pa=100_900.0) == pytest.approx(14.0e5 + 100_900.0, rel=1e-12)
    cdp2 = gt2.tag_for("compressor_discharge_pressure")
    assert cdp2 is not None and cdp2.baro_reference is None
    assert cdp2.to_si(14.0) == pytest.approx(14.0e5 + 99_500.0, rel=1e-12)  # fixed baro_pa
    t_amb = gt1.tag_for("ambient_temperature")
    assert t_amb is not None and t_amb.to_si(15.0) == pytest.approx(288.15, abs=1e-12)
    rh = gt3.tag_for("ambient_relative_humidity")
    assert rh is not None and rh.key == "ambient_humidity" and rh.to_si(60.0) == pytest.approx(0.60)
    kw = gt3.tag_for("generator_power")
    assert kw is not None and kw.to_si(12_000.0) == pytest.approx(12.0e6)
    assert gt1.fuel_properties is not None and float(gt1.fuel_properties.lhv) > 40e6
    assert gt1.effective_parameters()["generator_efficiency"] == 0.985
    assert gt1.unit_type == "gas_turbine" and gt1.unit_type_impl.name == "gas_turbine"


def test_subscriptions_are_derived_from_the_tags(tmp_path: Path) -> None:
    plant = load_plant(EXAMPLE)
    assert plant.subscriptions() == plant.topics()
    assert "kestrel/gt3/data" in plant.subscriptions()
    assert all("+" not in s and "#" not in s for s in plant.subscriptions())
    index = plant.tag_index()
    assert len(index) == plant.n_tags == 38
    assert index[("kestrel/gt3/data", "discharge_press")][0] == "KR-GT3"
    parent = load_plant(_variant(tmp_path, ('subscriptions = "exact"', 'subscriptions = "parent"')))
    assert parent.subscriptions() == ["kestrel/gt1/+", "kestrel/gt2/+", "kestrel/gt3/data"]


# ----------------------------------------------------------------------------------------------
# Error classes
# ----------------------------------------------------------------------------------------------


def test_unknown_uom(tmp_path: Path) -> None:
    path = _variant(tmp_path, ('uom = "degC"', 'uom = "degc"'))
    issue = _one(_issues(path), "units.KR-GT1.tags[0].uom")
    assert "unknown unit 'degc'" in issue.message and "kestrel/gt1/TT-AMB" in issue.message
    assert issue.fix.startswith("use one of degC")
    assert re.match(LINE, str(issue))


def test_missing_uom(tmp_path: Path) -> None:
    path = _variant(tmp_path, ('  uom = "kg/h"\n', ""))
    issue = _one(_issues(path), "units.KR-GT1.tags[9].uom")
    assert issue.message == "required key missing" and issue.fix == "add uom = ..."


def test_wrong_kind_of_uom(tmp_path: Path) -> None:
    path = _variant(tmp_path, ('uom = "kg/h"', 'uom = "kPa"'))
    issue = _one(_issues(path), "units.KR-GT1.tags[9].uom")
    assert "is a pressure, but this measurement is a mass flow" in issue.message
    assert "kg/h" in issue.fix


def test_unknown_key_suggests_the_spelling(tmp_path: Path) -> None:
    path = _variant(tmp_path, ("  max_age_s = 60.0", "  max_age = 60.0"))
    issue = _one(_issues(path), "units.KR-GT1.tags[0].max_age")
    assert issue.message == "unknown key" and "did you mean 'max_age_s'" in issue.fix


def test_missing_and_duplicated_measurements(tmp_path: Path) -> None:
    path = _variant(
        tmp_path,
        ('measurement = "generator_power"', 'measurement = "fuel_mass_flow"'),
    )
    issues = _issues(path)
    missing = _one(issues, "units.KR-GT1.tags")
    texts = [i.message for i in issues if i.key_path == "units.KR-GT1.tags"]
    assert any("required measurement(s) not mapped: generator_power" in t for t in texts)
    assert any("'fuel_mass_flow' is mapped 2 times (tags[9], tags[11])" in t for t in texts)
    assert missing.fix


def test_unknown_measurement(tmp_path: Path) -> None:
    path = _variant(tmp_path, ('measurement = "exhaust_pressure"', 'measurement = "exhaust_pres"'))
    issue = _one(_issues(path), "units.KR-GT1.tags[8].measurement")
    assert "unknown measurement 'exhaust_pres'" in issue.message
    assert "did you mean 'exhaust_pressure'" in issue.fix


def test_range_low_not_below_high(tmp_path: Path) -> None:
    path = _variant(tmp_path, ("  low = 850.0\n  high = 1070.0", "  low = 1070.0\n  high = 850.0"))
    issue = _one(_issues(path), "units.KR-GT1.tags[1]")
    assert "is not below high" in issue.message


def test_range_beyond_physical_limits(tmp_path: Path) -> None:
    # relative humidity is a fraction 0..1 (glossary); 150 %RH is 1.5
    path = _variant(tmp_path, ("  low = 0.0\n  high = 100.0", "  low = 0.0\n  high = 150.0"))
    issue = _one(_issues(path), "units.KR-GT1.tags[2]")
    assert "exceeds the physical limits of ambient_relative_humidity" in issue.message
    assert "%RH" in issue.fix


def test_gauge_pressure_needs_a_pressure_reference(tmp_path: Path) -> None:
    path = _variant(
        tmp_path,
        ('baro_measurement = "ambient_pressure"', 'baro_measurement = "ambient_temperature"'),
    )
    issue = _one(_issues(path), "units.KR-GT1.tags[6].baro_measurement")
    assert "is not a pressure measurement" in issue.message


def test_gauge_reference_must_be_mapped_and_absolute(tmp_path: Path) -> None:
    # KR-GT3 reads kPag against its own ambient pressure; make that reference gauge too
    path = _variant(
        tmp_path,
        (
            'key = "ambient_press"\n  measurement = "ambient_pressure"\n  uom = "kPa"',
            'key = "ambient_press"\n  measurement = "ambient_pressure"\n  uom = "kPag"',
        ),
    )
    issues = _issues(path)
    assert any("is itself a gauge reading" in i.message for i in issues)


def test_barometric_reference_on_an_absolute_unit(tmp_path: Path) -> None:
    path = _variant(tmp_path, ('uom = "barg"\n  baro_pa', 'uom = "bar"\n  baro_pa'))
    issue = _one(_issues(path), "units.KR-GT2.tags[6]")
    assert "non-gauge unit 'bar'" in issue.message


def test_duplicate_topic_and_key(tmp_path: Path) -> None:
    path = _variant(tmp_path, ('topic = "kestrel/gt2/TT-FG"', 'topic = "kestrel/gt1/TT-FG"'))
    issue = _one(_issues(path), "units.KR-GT2.tags[10]")
    assert "already mapped by units.KR-GT1.tags[10]" in issue.message


def test_invalid_fuel_is_rejected_by_models_fuel(tmp_path: Path) -> None:
    # composition sums to 0.931 + ... = 0.99 instead of 1 (ISO 6976 mole fractions sum to 1)
    path = _variant(tmp_path, ("CO2 = 0.012 } }", "CO2 = 0.002 } }"))
    issue = _one(_issues(path), "units.KR-GT1.fuel")
    assert issue.message.startswith("fuel rejected")
    assert "sum" in issue.fix


def test_unknown_unit_type_and_nonpositive_tick(tmp_path: Path) -> None:
    path = _variant(
        tmp_path,
        ('unit_type = "gas_turbine"', 'unit_type = "gas_turbin"'),
        ("tick_s = 10.0", "tick_s = 0"),
    )
    issues = _issues(path)
    assert "did you mean 'gas_turbine'" in _one(issues, "units.KR-GT1.unit_type").fix
    tick = _one(issues, "daemon.tick_s")
    assert "greater than 0" in tick.message and tick.fix == "give a number > 0.0"


def test_unknown_parameter_and_baseline(tmp_path: Path) -> None:
    path = _variant(
        tmp_path,
        ("generator_efficiency = 0.985", "generator_eficiency = 0.985"),
        ("corrected_power = 45.0e6", "corrected_powr = 45.0e6"),
    )
    issues = _issues(path)
    assert (
        "did you mean 'generator_efficiency'"
        in _one(issues, "units.KR-GT1.parameters.generator_eficiency").fix
    )
    assert "unknown result" in _one(issues, "units.KR-GT1.baseline.corrected_powr").message


def test_toml_syntax_error(tmp_path: Path) -> None:
    path = tmp_path / "broken.toml"
    path.write_text("[site\nname = 'x'\n")
    (issue,) = _issues(path)
    assert issue.message.startswith("not valid TOML") and "line 1" in issue.message


def test_all_errors_reported_at_once_by_check(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _variant(
        tmp_path,
        ('uom = "mbar"', 'uom = "millibar_x"'),
        ("  max_age_s = 30.0", "  max_age = 30.0"),
        ('measurement = "exhaust_pressure"', 'measurement = "exhaust_pres"'),
        ("tick_s = 10.0", "tick_s = -1"),
        ('password_file = ""', 'password = "hunter2"'),
    )
    assert cli.main(["check", "-c", str(path)]) == 2  # same status as `run` (deploy unit)
    err = capsys.readouterr().err.strip().splitlines()
    assert err[-1].startswith("FAILED: ")
    lines = err[:-1]
    assert len(lines) >= 5
    for line in lines:
        m = LINE.match(line)
        assert m and m["file"] == str(path), line
    keys = {LINE.match(line)["key"] for line in lines}  # type: ignore[index]
    assert {
        "units.KR-GT1.tags[1].uom",
        "units.KR-GT1.tags[3].max_age",
        "daemon.tick_s",
        "units.KR-GT1.tags[8].measurement",
        "broker.password",
    } <= keys
    assert "hunter2" not in "\n".join(err)


# ----------------------------------------------------------------------------------------------
# Secrets and environment
# ----------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("old", "new", "key", "var"),
    [
        (
            'password_file = ""',
            'password = "hunter2"',
            "broker.password",
            "BRAYSCOPE_BROKER_PASSWORD",
        ),
        (
            'bind = "127.0.0.1:9478"',
            'bind = "127.0.0.1:9478"\napi_token = "hunter2"',
            "http.api_token",
            "BRAYSCOPE_API_TOKEN",
        ),
        (
            'url = "sqlite:///./brayscope-data/brayscope.sqlite"',
            'url = "postgresql+psycopg://bray:hunter2@db/brayscope"',
            "database.url",
            "BRAYSCOPE_DATABASE_PASSWORD",
        ),
    ],
)
def test_inline_secret_is_an_error_with_the_fix(
    tmp_path: Path, old: str, new: str, key: str, var: str
) -> None:
    issues = _issues(_variant(tmp_path, (old, new)))
    issue = _one(issues, key)
    assert var in issue.fix
    assert [i for i in issues if i.key_path == key] == [issue]  # reported once
    assert "hunter2" not in "\n".join(str(i) for i in issues)


def test_environment_overrides(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("BRAYSCOPE_DATABASE_URL", "postgresql+psycopg://bray@db.example/brayscope")
    monkeypatch.setenv("BRAYSCOPE_BROKER_HOST", "broker.example")
    monkeypatch.setenv("BRAYSCOPE_BROKER_PORT", "8883")
    monkeypatch.setenv("BRAYSCOPE_HTTP_BIND", "0.0.0.0:9500")
    monkeypatch.setenv("BRAYSCOPE_BROKER_PASSWORD", "from-env")
    monkeypatch.setenv("BRAYSCOPE_API_TOKEN", "tok-env")
    plant = load_plant(EXAMPLE)
    assert plant.database.url == "postgresql+psycopg://bray@db.example/brayscope"
    assert (plant.broker.host, plant.broker.port) == ("broker.example", 8883)
    assert (plant.http.host, plant.http.port) == ("0.0.0.0", 9500)
    assert plant.broker.password is not None
    assert plant.broker.password.get_secret_value() == "from-env"
    assert plant.http.api_token is not None and plant.http.api_token.get_secret_value() == "tok-env"
    assert "from-env" not in repr(plant) and "from-env" not in plant.model_dump_json()
    assert "tok-env" not in repr(plant) and "tok-env" not in plant.model_dump_json()


def test_bad_environment_value(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("BRAYSCOPE_BROKER_PORT", "eighty")
    with pytest.raises(PlantConfigError) as info:
        load_plant(EXAMPLE)
    (issue,) = info.value.issues
    assert issue.file == "environment" and issue.key_path == "BRAYSCOPE_BROKER_PORT"


def test_secrets_from_files(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    (tmp_path / "broker.pw").write_text("pw-from-file\n")
    token = tmp_path / "api.token"
    token.write_text("tok-from-file")
    monkeypatch.setenv("BRAYSCOPE_API_TOKEN_FILE", str(token))
    path = _variant(tmp_path, ('password_file = ""', 'password_file = "broker.pw"'))
    plant = load_plant(path)  # password_file is relative to the plant file
    assert plant.broker.password is not None
    assert plant.broker.password.get_secret_value() == "pw-from-file"
    assert plant.http.api_token is not None
    assert plant.http.api_token.get_secret_value() == "tok-from-file"


def test_missing_secret_file(tmp_path: Path) -> None:
    path = _variant(tmp_path, ('password_file = ""', 'password_file = "nope.pw"'))
    issue = _one(_issues(path), "broker.password_file")
    assert "cannot read secret file" in issue.message


# ----------------------------------------------------------------------------------------------
# brayscope check --help, brayscope db
# ----------------------------------------------------------------------------------------------


def test_check_help_teaches_with_an_example(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        cli.main(["check", "--help"])
    assert info.value.code == 0
    out = capsys.readouterr().out
    assert "brayscope check -c daemon/examples/kestrel-ridge.toml" in out
    assert "OK: 3 units" in out


def test_check_lists_tag_conversions(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["check", "-c", str(EXAMPLE), "--tags"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert len(out) == 1 + 38
    cdp = next(line for line in out if "kestrel/gt1/PT-CDP" in line)
    assert "Pa = 100000*x + 0 + ambient_pressure" in cdp


def test_db_commands(
    store_url: str, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    monkeypatch.setenv("BRAYSCOPE_DATABASE_URL", store_url)
    assert cli.main(["db", "current", "-c", str(EXAMPLE)]) == 3  # empty: behind
    from daemon.storage import Store

    st = Store(store_url)
    head = st.head_revision()
    st.close()
    assert cli.main(["db", "upgrade", "-c", str(EXAMPLE)]) == 0
    assert f"-> {head}" in capsys.readouterr().out
    assert cli.main(["db", "current", "-c", str(EXAMPLE)]) == 0
    assert f"revision: {head} (head {head}, up to date)" in capsys.readouterr().out
    assert cli.main(["db", "purge", "-c", str(EXAMPLE), "--days", "30", "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert "would delete: 0 results (older than 30 days), 0 readings (older than 30 days)" in out


# ----------------------------------------------------------------------------------------------
# Auxiliary tags (aux.<name>) and redundant sensors (name:label)
# ----------------------------------------------------------------------------------------------

AUX_TAG = """
  [[units.KR-GT1.tags]]
  topic = "kestrel/gt1/VT-BRG2"
  measurement = "{measurement}"
  uom = "{uom}"
  low = {low}
  high = {high}
"""
GT2_HEADER = "[units.KR-GT2]"


def _with_tag(tmp_path: Path, **fields: object) -> Path:
    block = AUX_TAG.format(**fields)
    return _variant(tmp_path, (GT2_HEADER, block + "\n" + GT2_HEADER))


def test_example_aux_tags_convert_to_si_and_stay_out_of_the_unit_type() -> None:
    plant = load_plant(EXAMPLE)
    gt1 = plant.units["KR-GT1"]
    vib = gt1.tag_for("aux.bearing1_vibration")
    oil = gt1.tag_for("aux.lube_oil_temperature")
    assert vib is not None and vib.is_aux and oil is not None and oil.is_aux
    # 1 mm = 1e-3 m (SI Brochure, 9th ed., prefixes); degC -> K adds 273.15 (NIST SP 811 B.9)
    assert vib.converter.target == "m/s" and vib.to_si(4.5) == pytest.approx(4.5e-3, rel=1e-12)
    assert oil.converter.target == "K" and oil.to_si(55.0) == pytest.approx(328.15, abs=1e-12)
    assert [t.measurement for t in gt1.aux_tags()] == [
        "aux.bearing1_vibration",
        "aux.lube_oil_temperature",
    ]
    names = {m.name for m in gt1.unit_type_impl.measurements}
    assert not any(t.measurement in names for t in gt1.aux_tags())


@pytest.mark.parametrize(
    ("fields", "key", "text"),
    [
        (
            {"measurement": "aux.Bearing-Vib", "uom": "mm/s", "low": 0, "high": 25},
            "units.KR-GT1.tags[14].measurement",
            "unusable name",
        ),
        (
            {"measurement": "aux.bearing2_vibration", "uom": "mms", "low": 0, "high": 25},
            "units.KR-GT1.tags[14].uom",
            "unknown unit 'mms'",
        ),
        (
            {"measurement": "aux.bearing2_vibration", "uom": "mm/s", "low": 25, "high": 0},
            "units.KR-GT1.tags[14]",
            "is not below high",
        ),
        (
            {"measurement": "aux.seal_pressure", "uom": "barg", "low": 0, "high": 5},
            "units.KR-GT1.tags[14].uom",
            "gauge unit 'barg' on an auxiliary measurement",
        ),
        (
            {"measurement": "aux.lube_oil_temperature", "uom": "degC", "low": 0, "high": 90},
            "units.KR-GT1.tags",
            "auxiliary measurement 'aux.lube_oil_temperature' is mapped 2 times",
        ),
    ],
)
def test_aux_tag_errors(tmp_path: Path, fields: dict[str, object], key: str, text: str) -> None:
    issues = [i for i in _issues(_with_tag(tmp_path, **fields)) if i.key_path == key]
    assert any(text in i.message for i in issues), issues


def test_aux_tag_is_decoded_and_range_checked(tmp_path: Path) -> None:
    from daemon.feeds.decode import Decoder

    plant = load_plant(EXAMPLE)
    dec = Decoder.from_plant(plant)
    ok = dec.decode("kestrel/gt1/VT-BRG1", b"3.2", 1_780_000_000.0)
    (r,) = ok.readings
    assert r.measurement == "aux.bearing1_vibration" and r.value == pytest.approx(3.2e-3)
    bad = dec.decode("kestrel/gt1/VT-BRG1", b"40", 1_780_000_000.0)
    (q,) = bad.quarantined
    assert q.reason == "out_of_range" and q.measurement == "aux.bearing1_vibration"
    cold = dec.decode("kestrel/gt1/TT-LO", b"-300", 1_780_000_000.0)
    assert cold.quarantined[0].reason == "nonphysical"  # below 0 K


REDUNDANT_CDT = (
    '  measurement = "compressor_discharge_temperature"\n',
    '  measurement = "compressor_discharge_temperature:A"\n  max_spread = 8.0\n',
)
SECOND_CDT = """
  [[units.KR-GT1.tags]]
  topic = "kestrel/gt1/TT-CDP-B"
  measurement = "{measurement}"
  uom = "degC"
  low = 100.0
  high = 520.0
{extra}"""


def _redundant(tmp_path: Path, measurement: str, extra: str = "", first=REDUNDANT_CDT) -> Path:
    block = SECOND_CDT.format(measurement=measurement, extra=extra)
    return _variant(tmp_path, first, (GT2_HEADER, block + "\n" + GT2_HEADER))


def test_redundant_sensors_load_as_a_group(tmp_path: Path) -> None:
    path = _redundant(tmp_path, "compressor_discharge_temperature:B", "  max_spread = 8.0\n")
    unit = load_plant(path).units["KR-GT1"]
    group = unit.sensor_groups()["compressor_discharge_temperature"]
    assert [t.sensor for t in group] == ["A", "B"]
    assert all(t.canonical == "compressor_discharge_temperature" for t in group)
    # a temperature difference of 8 degC is 8 K (NIST SP 811 4.2.1.1): scale only, no offset
    assert group[1].max_spread_si == pytest.approx(8.0)


@pytest.mark.parametrize(
    ("measurement", "extra", "first", "key", "text"),
    [
        (  # two plain tags: the classic duplicate, with the fix naming the group form
            "compressor_discharge_temperature",
            "",
            ("  max_age_s = 60.0", "  max_age_s = 60.0"),
            "units.KR-GT1.tags",
            "is mapped 2 times",
        ),
        (
            "compressor_discharge_temperature:B",
            "",
            REDUNDANT_CDT,
            "units.KR-GT1.tags[14].max_spread",
            "has no max_spread",
        ),
        (
            "compressor_discharge_temperature:A",
            "  max_spread = 8.0\n",
            REDUNDANT_CDT,
            "units.KR-GT1.tags",
            "sensor label(s) A",
        ),
        (
            "compressor_discharge_temperature:toolonglabel",
            "  max_spread = 8.0\n",
            REDUNDANT_CDT,
            "units.KR-GT1.tags[14].measurement",
            "sensor label 'toolonglabel'",
        ),
        (
            "exhaust_temperature",
            "  max_spread = 8.0\n",
            REDUNDANT_CDT,
            "units.KR-GT1.tags[14].max_spread",
            "applies to redundant sensors only",
        ),
        (
            "exhaust_temperature",
            "  stuck_band = 0.5\n",
            REDUNDANT_CDT,
            "units.KR-GT1.tags[14].stuck_band",
            "without stuck_after_s",
        ),
    ],
)
def test_redundancy_and_fault_key_errors(
    tmp_path: Path,
    measurement: str,
    extra: str,
    first: tuple[str, str],
    key: str,
    text: str,
) -> None:
    issues = [
        i for i in _issues(_redundant(tmp_path, measurement, extra, first)) if i.key_path == key
    ]
    assert any(text in i.message for i in issues), issues
    if "mapped 2 times" in text:
        assert any('"compressor_discharge_temperature:A"' in i.fix for i in issues)


def test_check_accepts_a_labelled_group(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = _redundant(tmp_path, "compressor_discharge_temperature:B", "  max_spread = 8.0\n")
    assert cli.main(["check", "-c", str(path)]) == 0
    assert capsys.readouterr().out.startswith("OK: 3 units, 39 tags")

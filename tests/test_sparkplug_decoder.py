"""The Sparkplug B host decoder: births, aliases, sequence numbers, bdSeq, deaths, quality,
rejections, and a fuzz of the protobuf decoding.  No broker: the edge node's messages are
recorded and handed to the decoder in order (``test_sparkplug_broker.py`` runs the same
through Mosquitto).

Sources of the check values:

* Message rules: Eclipse Sparkplug 3.0.0 specification — births carry name, alias, datatype
  and current value of every metric (6.4.18-19); data carries aliases only (6.4.3); ``seq``
  0..255 per edge node, wrapping to 0 (6.4.1); a missing ``seq`` past the reorder timeout asks
  for a rebirth (5.10); an NDEATH whose bdSeq matches the NBIRTH makes the node's metrics
  stale (4.2.1); Quality 500 is STALE (6.4.9).
* Unit conversions (exact by definition; BIPM SI Brochure, 9th edition 2019): T/K = t/°C +
  273.15; 1 kPa = 1e3 Pa; 1 bar = 1e5 Pa; 1 MW = 1e6 W; 1 kg/h = 1/3600 kg/s.
* The operating point is the invented KR-GT1 of the Kestrel Ridge demo plant.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sparkplug_support import (
    DEVICE,
    DEVICE_METRICS,
    DEVICE_VALUES,
    GROUP,
    NODE,
    NODE_METRICS,
    NODE_VALUES,
    EdgeNode,
    add_quality,
    make_decoder,
)

from daemon.feeds.sparkplug import sparkplug_b_pb2 as pb
from daemon.feeds.sparkplug.decoder import (
    DeviceBirth,
    InputsStale,
    NodeBirth,
    NodeDeath,
    RebirthRequest,
    SequenceGap,
    SparkplugDecoder,
    SparkplugResult,
)
from daemon.types import QUARANTINE_REASONS, Reading

DT = pb.DataType
UNIT = "KR-GT1"

#: KR-GT1's values of NODE_VALUES / DEVICE_VALUES in SI (conversions in the module docstring)
EXPECTED_SI = {
    "ambient_temperature": 18.3 + 273.15,
    "ambient_pressure": 100.85e3,
    "compressor_discharge_temperature": 398.85 + 273.15,
    "compressor_discharge_pressure": 14.985e5,
    "exhaust_temperature": 547 + 273.15,
    "fuel_mass_flow": 9720 / 3600,
    "generator_power": 44e6,
}


class RecordingEdge(EdgeNode):
    """The test edge node without a broker: messages are recorded, in order."""

    def __init__(self) -> None:
        super().__init__("", 0, NODE_METRICS, DEVICE_METRICS)
        self.sent: list[tuple[str, bytes]] = []

    def publish(self, topic: str, payload: bytes) -> None:
        self.sent.append((topic, payload))


class Run:
    """Feed everything the edge node recorded into the decoder."""

    def __init__(self, decoder: SparkplugDecoder, edge: RecordingEdge) -> None:
        self.decoder = decoder
        self.edge = edge
        self.results: list[SparkplugResult] = []
        self.now = time.time()

    def flush(self, dt: float = 0.01) -> list[SparkplugResult]:
        out = []
        for topic, payload in self.edge.sent:
            self.now += dt
            res = self.decoder.decode(topic, payload, self.now)
            assert res.received == len(res.readings) + len(res.quarantined)
            out.append(res)
        self.edge.sent.clear()
        self.results.extend(out)
        return out

    def readings(self, results: list[SparkplugResult] | None = None) -> dict[str, Reading]:
        return {r.measurement: r for res in results or self.results for r in res.readings}

    def reasons(self, results: list[SparkplugResult]) -> list[str]:
        return [q.reason for res in results for q in res.quarantined]

    def events(self, results: list[SparkplugResult], kind: type) -> list[Any]:
        return [e for res in results for e in res.events if isinstance(e, kind)]


@pytest.fixture
def run(tmp_path: Path) -> Run:
    return Run(make_decoder(tmp_path, reorder_timeout_s=0.5), RecordingEdge())


def born(run: Run) -> list[SparkplugResult]:
    run.edge.nbirth(NODE_VALUES)
    run.edge.dbirth(DEVICE, DEVICE_VALUES)
    return run.flush()


def test_births_give_current_values_in_si(run: Run) -> None:
    res = born(run)
    got = run.readings(res)
    assert set(got) == set(EXPECTED_SI)
    for m, v in EXPECTED_SI.items():
        assert got[m].value == pytest.approx(v, rel=1e-12), m  # exact unit definitions
        assert got[m].unit == UNIT and got[m].quality == "good"
    assert got["compressor_discharge_temperature"].raw_value == 398.85  # float32 shown short
    assert got["compressor_discharge_temperature"].topic == (
        f"spBv1.0/{GROUP}/{NODE}/{DEVICE}#Compressor/Discharge Temperature"
    )
    # the DataSet metric is mapped (exhaust_pressure) but not readable
    assert run.reasons(res) == ["unsupported_datatype"]
    (q,) = [q for r in res for q in r.quarantined]
    assert (q.unit, q.measurement) == (UNIT, "exhaust_pressure")
    # unmapped: Hardware Make, bdSeq, Node Control/Rebirth (node); Status/Running (device)
    assert [r.ignored for r in res] == [3, 1]
    assert run.events(res, NodeBirth) == [NodeBirth(GROUP, NODE, 0)]
    assert run.events(res, DeviceBirth) == [DeviceBirth(GROUP, NODE, DEVICE)]
    assert run.decoder.online(GROUP, NODE, DEVICE)


def test_data_by_alias_with_metric_timestamps(run: Run) -> None:
    born(run)
    ts = run.now - 2.0
    run.edge.ddata(DEVICE, {"Compressor/Discharge Temperature": 401.0, "Fuel/Flow": 9800}, ts=ts)
    run.edge.ndata({"Site/Barometer": 100.9})
    res = run.flush()
    got = run.readings(res)
    assert got["compressor_discharge_temperature"].value == pytest.approx(401.0 + 273.15)
    assert got["compressor_discharge_temperature"].source_ts == pytest.approx(ts, abs=1e-3)
    assert got["fuel_mass_flow"].value == pytest.approx(9800 / 3600)
    assert got["ambient_pressure"].value == pytest.approx(100.9e3)
    assert not run.reasons(res)


def test_data_before_birth_is_quarantined_and_asks_for_rebirth(run: Run) -> None:
    run.edge.ndata({"Site/Barometer": 100.9}, seq=7)
    run.edge.ddata(DEVICE, {"Fuel/Flow": 9800}, seq=8)
    res = run.flush()
    assert run.reasons(res) == ["no_birth", "no_birth"]
    assert all(q.unit == UNIT for r in res for q in r.quarantined)
    (req,) = run.events(res, RebirthRequest)  # one request, not one per message
    assert req.topic == f"spBv1.0/{GROUP}/NCMD/{NODE}"
    (m,) = pb.Payload.FromString(req.payload).metrics
    assert (m.name, m.boolean_value) == ("Node Control/Rebirth", True)
    # the birth answers it: values flow
    assert run.readings(born(run))


def test_device_data_before_its_dbirth(run: Run) -> None:
    run.edge.nbirth(NODE_VALUES)
    run.edge.ddata(DEVICE, {"Fuel/Flow": 9800})
    res = run.flush()
    assert run.reasons(res) == ["no_birth"]
    assert "before its DBIRTH" in res[1].quarantined[0].detail
    assert run.events(res, RebirthRequest)


def test_unknown_alias(run: Run) -> None:
    born(run)
    stray = pb.Payload.Metric(alias=99, timestamp=int(run.now * 1000), double_value=1.0)
    run.edge.ddata(DEVICE, {"Fuel/Flow": 9700}, extra=[stray])
    res = run.flush()
    assert run.reasons(res) == ["unknown_alias"]
    assert "alias 99" in res[0].quarantined[0].detail
    assert run.readings(res)["fuel_mass_flow"].value == pytest.approx(9700 / 3600)
    assert len(run.events(res, RebirthRequest)) == 1


def test_alias_of_another_device_is_unknown_here(run: Run) -> None:
    born(run)
    node_alias = pb.Payload.Metric(alias=1, float_value=20.0)  # Site/Ambient Temperature
    run.edge.ddata(DEVICE, {}, extra=[node_alias])
    assert run.reasons(run.flush()) == ["unknown_alias"]


def test_sequence_reorder_inside_the_window_is_no_gap(run: Run) -> None:
    born(run)  # seq 0, 1
    run.edge.ndata({"Site/Barometer": 100.1}, seq=2)
    run.edge.ndata({"Site/Barometer": 100.3}, seq=4)
    run.edge.ndata({"Site/Barometer": 100.2}, seq=3)  # late, within 0.5 s
    res = run.flush()
    assert len(run.readings(res)) == 1 and len([r for x in res for r in x.readings]) == 3
    assert not run.events(res, SequenceGap)
    assert not run.decoder.expire(run.now + 5.0)
    assert run.decoder.counters.gaps == 0


def test_sequence_gap_after_the_window_counts_and_asks_for_rebirth(run: Run) -> None:
    born(run)
    run.edge.ndata({"Site/Barometer": 100.1}, seq=2)
    run.edge.ndata({"Site/Barometer": 100.4}, seq=5)  # 3 and 4 never come
    res = run.flush()
    assert not run.events(res, SequenceGap)  # window still open
    events = run.decoder.expire(run.now + 0.6)
    gaps = [e for e in events if isinstance(e, SequenceGap)]
    assert [(g.missing, g.units) for g in gaps] == [(2, frozenset({UNIT}))]
    assert [e for e in events if isinstance(e, RebirthRequest)]
    assert (run.decoder.counters.gaps, run.decoder.counters.missing) == (1, 2)


def test_sequence_wraps_from_255_to_0(run: Run) -> None:
    born(run)  # seq 0, 1
    for n in [*range(2, 256), 0, 1, 2]:
        run.edge.ndata({"Site/Barometer": 100.0 + n / 1000}, seq=n)
    run.flush()
    run.decoder.expire(run.now + 10)
    c = run.decoder.counters
    assert (c.gaps, c.missing, c.repeats) == (0, 0, 0)


def test_repeated_seq_is_counted(run: Run) -> None:
    born(run)
    run.edge.ndata({"Site/Barometer": 100.1}, seq=2)
    run.edge.ndata({"Site/Barometer": 100.1}, seq=2)
    res = run.flush()
    assert run.decoder.counters.repeats == 1
    assert len([r for x in res for r in x.readings]) == 2  # idempotent downstream


def test_ndeath_with_matching_bdseq_makes_inputs_stale(run: Run) -> None:
    born(run)
    run.edge.ndeath()
    res = run.flush()
    (death,) = run.events(res, NodeDeath)
    assert death.matched and death.bd_seq == 0
    (stale,) = run.events(res, InputsStale)
    assert stale.cause == "node_death"
    assert {m for _, m in stale.inputs} == {*EXPECTED_SI, "exhaust_pressure"}
    assert not run.decoder.online(GROUP, NODE)
    run.edge.ndata({"Site/Barometer": 100.1})
    assert run.reasons(run.flush()) == ["no_birth"]


def test_ndeath_of_an_older_session_is_ignored(run: Run) -> None:
    born(run)
    run.edge.bd_seq = 7  # a will registered by an earlier connection
    run.edge.ndeath()
    res = run.flush()
    assert run.events(res, NodeDeath) == [NodeDeath(GROUP, NODE, 7, matched=False)]
    assert not run.events(res, InputsStale)
    assert run.decoder.online(GROUP, NODE) and run.decoder.counters.deaths_ignored == 1


def test_ddeath_makes_only_that_device_stale(run: Run) -> None:
    born(run)
    run.edge.ddeath(DEVICE)
    res = run.flush()
    (stale,) = run.events(res, InputsStale)
    assert stale.cause == "device_death" and stale.device == DEVICE
    assert "ambient_pressure" not in {m for _, m in stale.inputs}
    assert "fuel_mass_flow" in {m for _, m in stale.inputs}
    assert run.decoder.online(GROUP, NODE) and not run.decoder.online(GROUP, NODE, DEVICE)


def test_rebirth_marks_device_inputs_stale_until_dbirth(run: Run) -> None:
    born(run)
    run.edge.nbirth(NODE_VALUES)
    res = run.flush()
    (stale,) = run.events(res, InputsStale)
    assert stale.cause == "rebirth"


def test_quality_property(run: Run) -> None:
    born(run)
    run.edge.ddata(
        DEVICE,
        {"Compressor/Discharge Temperature": 400.0, "Fuel/Flow": 9700, "Exhaust/Temperature": 550},
        quality={"Compressor/Discharge Temperature": 500, "Fuel/Flow": 100},
    )
    res = run.flush()
    (q,) = res[0].quarantined
    assert (q.reason, q.measurement) == ("bad_quality", "compressor_discharge_temperature")
    assert "STALE" in q.detail
    got = run.readings(res)
    assert got["fuel_mass_flow"].quality == "uncertain"
    assert got["exhaust_temperature"].quality == "good"


def test_null_wrong_datatype_and_range(run: Run) -> None:
    born(run)
    run.edge.ddata(
        DEVICE,
        {"Compressor/Discharge Temperature": None, "Fuel/Flow": 9700, "Exhaust/Temperature": 900},
        datatypes={"Fuel/Flow": DT.String},
    )
    res = run.flush()
    by_m = {q.measurement: q for q in res[0].quarantined}
    assert by_m["compressor_discharge_temperature"].reason == "null_value"
    assert by_m["fuel_mass_flow"].reason == "wrong_type"
    assert "differs from the birth" in by_m["fuel_mass_flow"].detail
    # 900 degC is outside the tag's plausible 200..700 degC: the MQTT decoder's range check
    assert by_m["exhaust_temperature"].reason == "out_of_range"


def test_historical_metrics_keep_their_source_time(run: Run) -> None:
    born(run)
    old = run.now - 3600.0
    m = pb.Payload.Metric(alias=13, timestamp=int(old * 1000), int_value=9600, is_historical=True)
    run.edge.ddata(DEVICE, {}, extra=[m])
    (r,) = run.flush()[0].readings
    assert r.source_ts == pytest.approx(old, abs=1e-3) and r.value == pytest.approx(9600 / 3600)
    assert run.decoder.counters.historical == 1


def test_whole_message_rejections(run: Run) -> None:
    d = run.decoder
    now = run.now
    bad = d.decode(f"spBv1.0/{GROUP}/NDATA/{NODE}", b"\x12\xff\xff", now)
    assert [q.reason for q in bad.quarantined] == ["malformed_protobuf"]
    assert bad.quarantined[0].unit == UNIT
    big = d.decode(f"spBv1.0/{GROUP}/NDATA/{NODE}", b"\x00" * (d.limits.max_payload_bytes + 1), now)
    assert [q.reason for q in big.quarantined] == ["oversized_payload"]
    wrong = d.decode("spBv1.0/KR/NDATA", b"", now)
    assert [q.reason for q in wrong.quarantined] == ["unknown_topic"]
    for ignored in (
        f"spBv1.0/{GROUP}/NCMD/{NODE}",
        "spBv1.0/STATE/other-host",
        f"spBv1.0/{GROUP}/NDATA/another-node",
    ):
        res = d.decode(ignored, b"", now)
        assert (res.received, res.ignored) == (0, 1)


def test_connection_lost_makes_everything_stale_until_rebirth(run: Run) -> None:
    born(run)
    (stale,) = run.decoder.connection_lost(run.now)
    assert stale.cause == "host_offline" and len(stale.inputs) == 8
    run.edge.ddata(DEVICE, {"Fuel/Flow": 9700})
    assert run.reasons(run.flush()) == ["no_birth"]


def test_duplicate_alias_in_births_is_unusable(run: Run) -> None:
    run.edge.nbirth(NODE_VALUES)  # Site/Ambient Temperature has alias 1
    p = pb.Payload(timestamp=int(run.now * 1000), seq=1)
    p.metrics.add(name="Other", alias=1, datatype=DT.Double, double_value=0.0)
    run.edge.publish(run.edge.topic("DBIRTH", DEVICE), p.SerializeToString())
    run.edge.seq = 1
    run.edge.ndata({"Site/Ambient Temperature": 20.0})  # alias 1, now ambiguous
    res = run.flush()
    assert run.reasons(res[-1:]) == ["unknown_alias"]
    assert "declared twice" in res[-1].quarantined[0].detail


# -- fuzz ----------------------------------------------------------------------------------------

TOPICS = [
    f"spBv1.0/{GROUP}/NBIRTH/{NODE}",
    f"spBv1.0/{GROUP}/DBIRTH/{NODE}/{DEVICE}",
    f"spBv1.0/{GROUP}/NDATA/{NODE}",
    f"spBv1.0/{GROUP}/DDATA/{NODE}/{DEVICE}",
    f"spBv1.0/{GROUP}/NDEATH/{NODE}",
    f"spBv1.0/{GROUP}/DDEATH/{NODE}/{DEVICE}",
    "spBv1.0/STATE/x",
    "not/sparkplug",
]
NAMES = [d.name for d in NODE_METRICS + DEVICE_METRICS[DEVICE]] + ["bdSeq", "?"]
_u32 = st.integers(0, 2**32 - 1)
_u64 = st.integers(0, 2**64 - 1)


@st.composite
def metrics(draw: st.DrawFn) -> pb.Payload.Metric:
    m = pb.Payload.Metric()
    if draw(st.booleans()):
        m.name = draw(st.sampled_from(NAMES))
    if draw(st.booleans()):
        m.alias = draw(st.integers(0, 20))
    if draw(st.booleans()):
        m.datatype = draw(st.integers(0, 40))
    if draw(st.booleans()):
        m.timestamp = draw(_u64)
    m.is_null = draw(st.booleans())
    m.is_historical = draw(st.booleans())
    field = draw(
        st.sampled_from(
            ["", "int_value", "long_value", "float_value", "double_value", "boolean_value",
             "string_value", "bytes_value"]
        )
    )  # fmt: skip
    if field == "int_value":
        m.int_value = draw(_u32)
    elif field == "long_value":
        m.long_value = draw(_u64)
    elif field == "float_value":
        m.float_value = draw(st.floats(width=32))
    elif field == "double_value":
        m.double_value = draw(st.floats())
    elif field == "boolean_value":
        m.boolean_value = draw(st.booleans())
    elif field == "string_value":
        m.string_value = draw(st.text(max_size=8))
    elif field == "bytes_value":
        m.bytes_value = draw(st.binary(max_size=8))
    if draw(st.booleans()):
        add_quality(m, draw(st.sampled_from([0, 192, 500, 100, 0x80000000, 7])))
    return m


@st.composite
def messages(draw: st.DrawFn) -> tuple[str, bytes]:
    topic = draw(st.sampled_from(TOPICS))
    if draw(st.integers(0, 3)) == 0:
        return topic, draw(st.binary(max_size=64))
    p = pb.Payload()
    if draw(st.booleans()):
        p.seq = draw(st.integers(0, 300))
    if draw(st.booleans()):
        p.timestamp = draw(_u64)
    for m in draw(st.lists(metrics(), max_size=6)):
        p.metrics.add().CopyFrom(m)
    raw = p.SerializeToString()
    if draw(st.integers(0, 5)) == 0 and raw:  # truncated
        raw = raw[: draw(st.integers(0, len(raw) - 1))]
    return topic, raw


@settings(
    max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(stream=st.lists(messages(), min_size=1, max_size=12))
def test_fuzz_no_exception_and_every_item_accounted(tmp_path: Path, stream: list) -> None:
    decoder = _FUZZ.setdefault("d", make_decoder(tmp_path))
    now = time.time()
    for i, (topic, payload) in enumerate(stream):
        res = decoder.decode(topic, payload, now + i * 0.01)
        assert res.received == len(res.readings) + len(res.quarantined)
        for q in res.quarantined:
            assert q.reason in QUARANTINE_REASONS
        for r in res.readings:
            assert r.unit == UNIT and r.quality in ("good", "uncertain")
    decoder.expire(now + 100)


_FUZZ: dict[str, SparkplugDecoder] = {}

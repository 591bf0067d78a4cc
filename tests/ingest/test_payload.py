"""Validation of published payloads: every refusal has a code and names the field."""

from __future__ import annotations

import json
import math
import time
from typing import Any

import orjson
from hypothesis import given, settings
from hypothesis import strategies as st

from tecfleet.ingest.payload import parse_message
from tecfleet.ingest.telemetry_item import T_MAX_C, T_MIN_C

NOW = 1_790_000_000.0
TOPIC = "tecfleet/unit-7/telemetry"


def good(**changes: Any) -> dict[str, Any]:
    item: dict[str, Any] = {
        "ts": NOW - 60,
        "t_cabinet": 4.2,
        "t_cold": -3.1,
        "t_hot": 31.5,
        "t_ambient": 22.0,
        "current": 3.2,
        "voltage": 8.1,
    }
    item.update(changes)
    return item


def parse(doc: Any, topic: str = TOPIC) -> Any:
    raw = doc if isinstance(doc, bytes) else json.dumps(doc).encode()
    return parse_message(topic, raw, prefix="tecfleet", now_s=NOW)


def test_single_object_is_one_reading() -> None:
    out = parse(good(seq=5, rh=40.0, door_open=False))
    assert out.rejects == []
    (reading,) = out.readings
    assert reading.device_id == "unit-7"
    assert reading.ts_ms == round((NOW - 60) * 1000)
    assert (reading.seq, reading.rh, reading.door_open) == (5, 40.0, False)


def test_rfc3339_with_offset_equals_unix_seconds() -> None:
    a = parse(good(ts="2026-01-01T01:00:00+01:00")).readings[0]
    b = parse(good(ts="2026-01-01T00:00:00Z")).readings[0]
    c = parse(good(ts=1767225600)).readings[0]
    assert a.ts_ms == b.ts_ms == c.ts_ms == 1767225600000


def test_batch_keeps_good_items_and_rejects_bad_ones_one_by_one() -> None:
    batch = [
        good(ts=NOW - 3),
        good(ts=NOW - 2, current=75.0),
        good(ts=NOW - 1),
        "not an object",
        {k: v for k, v in good().items() if k != "t_ambient"},
    ]
    out = parse(batch)
    assert [r.ts_ms for r in out.readings] == [round((NOW - 3) * 1000), round((NOW - 1) * 1000)]
    assert [(r.item, r.code) for r in out.rejects] == [
        (1, "out_of_range"),
        (3, "wrong_shape"),
        (4, "missing_field"),
    ]
    assert "current" in out.rejects[0].reason
    assert "t_ambient" in out.rejects[2].reason
    assert json.loads(out.rejects[0].payload)["current"] == 75.0


def test_each_kind_of_bad_input_has_its_code() -> None:
    cases: list[tuple[str, bytes, str]] = [
        (TOPIC, b"\xff\xfe{}", "not_utf8"),
        (TOPIC, b'{"ts": ', "invalid_json"),
        (TOPIC, b"42", "wrong_shape"),
        (TOPIC, b"[]", "empty_batch"),
        (TOPIC, json.dumps(good(t_hot=400.0)).encode(), "out_of_range"),
        (TOPIC, json.dumps(good(t_cold=-99.0)).encode(), "out_of_range"),
        (TOPIC, json.dumps(good(voltage=-70.0)).encode(), "out_of_range"),
        (TOPIC, json.dumps(good(rh=120.0)).encode(), "out_of_range"),
        (TOPIC, json.dumps(good(current="3.2")).encode(), "wrong_type"),
        (TOPIC, json.dumps(good(door_open="yes")).encode(), "wrong_type"),
        (TOPIC, json.dumps(good(seq=-1)).encode(), "out_of_range"),
        (TOPIC, json.dumps(good(ts=NOW + 301)).encode(), "future_timestamp"),
        (TOPIC, json.dumps(good(ts="2026-01-01T00:00:00")).encode(), "bad_timestamp"),
        (TOPIC, json.dumps(good(ts="yesterday")).encode(), "bad_timestamp"),
        (TOPIC, json.dumps(good(ts=100.0)).encode(), "bad_timestamp"),
        (TOPIC, json.dumps(good(device_id="unit-8")).encode(), "device_mismatch"),
        ("tecfleet/bad id!/telemetry", json.dumps(good()).encode(), "bad_device_id"),
        ("tecfleet/" + "x" * 65 + "/telemetry", json.dumps(good()).encode(), "bad_device_id"),
        ("other/unit-7/telemetry", json.dumps(good()).encode(), "bad_topic"),
        ("tecfleet/unit-7/status", b"sleepy", "bad_status"),
    ]
    for topic, raw, code in cases:
        out = parse_message(topic, raw, prefix="tecfleet", now_s=NOW)
        assert out.readings == [], (code, raw)
        assert [r.code for r in out.rejects] == [code], (code, raw, out.rejects)
        assert out.rejects[0].reason


def test_nan_and_infinity_are_refused() -> None:
    for raw in (b'{"ts": 1, "t_cabinet": NaN}', b"[1e999]"):
        out = parse(raw)
        assert out.readings == [] and out.rejects[0].code == "invalid_json"


def test_a_timestamp_within_the_tolerance_ahead_is_accepted() -> None:
    out = parse(good(ts=NOW + 299))
    assert len(out.readings) == 1


def test_payload_too_large() -> None:
    raw = json.dumps([good(ts=NOW - i) for i in range(20_000)]).encode()
    out = parse_message(TOPIC, raw, prefix="tecfleet", now_s=NOW, max_payload_bytes=1_048_576)
    assert [r.code for r in out.rejects] == ["payload_too_large"]


def test_senml_pack_with_base_values() -> None:
    # RFC 8428 section 5, example shape: base name, base time, relative times, units.
    pack = [
        {
            "bn": "urn:dev:mac:0024befffe804ff1:",
            "bt": NOW - 120,
            "bu": "Cel",
            "n": "t_cabinet",
            "v": 4.0,
        },
        {"n": "t_cold", "v": -2.0},
        {"n": "t_hot", "v": 30.0},
        {"n": "t_ambient", "v": 21.0},
        {"n": "current", "u": "A", "v": 2.5},
        {"n": "voltage", "u": "V", "v": 6.0},
        {"n": "rh", "u": "%RH", "v": 55.0},
        {"n": "door_open", "vb": True},
        {"n": "t_cabinet", "t": 60, "v": 4.1},
        {"n": "t_cold", "t": 60, "v": -2.1},
        {"n": "t_hot", "t": 60, "v": 30.1},
        {"n": "t_ambient", "t": 60, "v": 21.0},
        {"n": "current", "t": 60, "u": "A", "v": 2.5},
        {"n": "voltage", "t": 60, "u": "V", "v": 6.1},
    ]
    out = parse(pack)
    assert out.rejects == []
    first, second = out.readings
    assert second.ts_ms - first.ts_ms == 60_000
    assert (first.rh, first.door_open, second.t_hot) == (55.0, True, 30.1)


def test_senml_wrong_unit_and_incomplete_group() -> None:
    pack = [
        {"bt": NOW - 10, "n": "t_cabinet", "u": "K", "v": 277.0},
        {"n": "t_cold", "u": "Cel", "v": -2.0},
    ]
    out = parse(pack)
    assert out.readings == []
    assert {r.code for r in out.rejects} == {"bad_unit", "missing_field"}


def test_senml_relative_time_is_relative_to_now() -> None:
    # RFC 8428 section 4.5.3: a time below 2**28 is relative to the current time.
    pack = [
        {"bt": -30, "n": "t_cabinet", "u": "Cel", "v": 4.0},
        {"n": "t_cold", "v": -2.0},
        {"n": "t_hot", "v": 30.0},
        {"n": "t_ambient", "v": 21.0},
        {"n": "current", "v": 2.5},
        {"n": "voltage", "v": 6.0},
    ]
    (reading,) = parse(pack).readings
    assert reading.ts_ms == round((NOW - 30) * 1000)


def test_status_topic() -> None:
    out = parse_message("tecfleet/unit-7/status", b"offline", prefix="tecfleet", now_s=NOW)
    assert out.status is not None and out.status.status == "offline"


json_values = st.recursive(
    st.none()
    | st.booleans()
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.integers(min_value=-(2**63), max_value=2**63 - 1)
    | st.text(max_size=20),
    lambda children: (
        st.lists(children, max_size=5)
        | st.dictionaries(
            st.sampled_from(
                [
                    "ts",
                    "t_cabinet",
                    "t_cold",
                    "t_hot",
                    "t_ambient",
                    "current",
                    "voltage",
                    "rh",
                    "seq",
                    "door_open",
                    "n",
                    "v",
                    "bt",
                    "bn",
                    "u",
                    "vb",
                    "t",
                    "x",
                ]
            ),
            children,
            max_size=9,
        )
    ),
    max_leaves=25,
)


@settings(max_examples=300, deadline=None)
@given(doc=json_values)
def test_fuzz_structured_json_never_raises(doc: Any) -> None:
    out = parse_message(TOPIC, orjson.dumps(doc), prefix="tecfleet", now_s=time.time())
    for reading in out.readings:
        for value in (reading.t_cabinet, reading.t_cold, reading.t_hot, reading.t_ambient):
            # A face temperature may be absent (no probe there); one that is sent is checked.
            assert value is None or (T_MIN_C <= value <= T_MAX_C and math.isfinite(value))
        assert 0 <= reading.current <= 50
    assert out.readings or out.rejects or isinstance(doc, list)


@settings(max_examples=300, deadline=None)
@given(raw=st.binary(max_size=300), topic=st.text(max_size=40))
def test_fuzz_raw_bytes_never_raise(raw: bytes, topic: str) -> None:
    out = parse_message(topic, raw, prefix="tecfleet", now_s=NOW)
    assert out.readings or out.rejects or out.status is not None or raw.strip() == b""


@settings(max_examples=200, deadline=None)
@given(t=st.floats(-60, 150), i=st.floats(0, 50), v=st.floats(-60, 60), age=st.floats(0, 3e8))
def test_fuzz_every_plausible_reading_is_stored(t: float, i: float, v: float, age: float) -> None:
    item = good(ts=NOW - age, t_cabinet=t, t_cold=t, t_hot=t, t_ambient=t, current=i, voltage=v)
    out = parse(item)
    assert out.rejects == [] and len(out.readings) == 1

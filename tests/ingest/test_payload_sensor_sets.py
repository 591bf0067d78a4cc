"""Units with fewer face probes: the face temperatures are optional in JSON and SenML, and a
face temperature that is sent is checked as before."""

from __future__ import annotations

import json
from typing import Any

import pytest

from tecfleet.ingest.payload import parse_message

NOW = 1_790_000_000.0
TOPIC = "tecfleet/unit-7/telemetry"

#: The channels every unit reports; the face probes come on top (set "full").
BASE = {"t_cabinet": 4.2, "t_ambient": 22.0, "current": 3.2, "voltage": 8.1}
FACES = {"t_cold": -3.1, "t_hot": 31.5}


def parse(doc: Any) -> Any:
    return parse_message(TOPIC, json.dumps(doc).encode(), prefix="tecfleet", now_s=NOW)


@pytest.mark.parametrize(
    "faces",
    [
        {"t_cold": -3.1, "t_hot": 31.5},  # full set
        {"t_hot": 31.5},  # no cold-side probe
        {},  # no face probe at all
    ],
)
def test_json_reading_is_stored_with_the_faces_it_has(faces: dict[str, float]) -> None:
    out = parse({"ts": NOW - 60, **BASE, **faces})
    assert out.rejects == []
    (reading,) = out.readings
    assert reading.t_cold == faces.get("t_cold")
    assert reading.t_hot == faces.get("t_hot")
    assert (reading.t_cabinet, reading.t_ambient, reading.voltage) == (4.2, 22.0, 8.1)


@pytest.mark.parametrize(
    ("field", "value", "code", "words"),
    [
        ("t_cold", -99.0, "out_of_range", "greater than or equal to -60"),
        ("t_hot", 400.0, "out_of_range", "less than or equal to 150"),
        ("t_cold", "3.1", "wrong_type", "valid number"),
        ("t_hot", True, "wrong_type", "valid number"),
        ("t_cold", None, "wrong_type", "valid number"),  # an explicit null is no absent probe
    ],
)
def test_a_face_temperature_sent_is_checked_as_before(
    field: str, value: Any, code: str, words: str
) -> None:
    out = parse({"ts": NOW - 60, **BASE, **FACES, field: value})
    assert out.readings == []
    (reject,) = out.rejects
    assert reject.code == code and field in reject.reason and words in reject.reason


@pytest.mark.parametrize("missing", ["t_cabinet", "t_ambient", "current", "voltage"])
def test_the_other_channels_stay_required(missing: str) -> None:
    item = {"ts": NOW - 60, **BASE}
    del item[missing]
    out = parse(item)
    assert out.readings == [] and [r.code for r in out.rejects] == ["missing_field"]
    assert missing in out.rejects[0].reason


def test_senml_pack_without_face_probes() -> None:
    # RFC 8428 section 4.5: base time carried forward; one group per resolved time.
    pack = [
        {"bt": NOW - 120, "n": "t_cabinet", "u": "Cel", "v": 4.0},
        {"n": "t_ambient", "u": "Cel", "v": 21.0},
        {"n": "current", "u": "A", "v": 3.0},
        {"n": "voltage", "u": "V", "v": 7.9},
        {"n": "t_cabinet", "t": 60, "u": "Cel", "v": 4.1},
        {"n": "t_hot", "t": 60, "u": "Cel", "v": 30.5},
        {"n": "t_ambient", "t": 60, "u": "Cel", "v": 21.1},
        {"n": "current", "t": 60, "u": "A", "v": 3.1},
        {"n": "voltage", "t": 60, "u": "V", "v": 8.0},
    ]
    out = parse(pack)
    assert out.rejects == []
    first, second = out.readings
    assert (first.t_cold, first.t_hot) == (None, None)
    assert (second.t_cold, second.t_hot) == (None, 30.5)


def test_senml_face_probe_in_a_wrong_unit_is_still_refused() -> None:
    pack = [
        {"bt": NOW - 120, "n": "t_cabinet", "u": "Cel", "v": 4.0},
        {"n": "t_cold", "u": "K", "v": 270.0},
        {"n": "t_ambient", "u": "Cel", "v": 21.0},
        {"n": "current", "u": "A", "v": 3.0},
        {"n": "voltage", "u": "V", "v": 7.9},
    ]
    out = parse(pack)
    # The bad record is refused; the rest of its group is a reading without a cold probe.
    assert [r.code for r in out.rejects] == ["bad_unit"]
    assert [r.t_cold for r in out.readings] == [None]

"""Validation of what devices publish: topics, JSON readings, batches and SenML packs.

Every refusal is a ``Reject`` with a short code and a sentence naming the field; a batch with
some bad items keeps the good ones. Nothing here raises on any input: the fuzz tests hold it to
that.

The stages of one message, in order: the topic (device id and kind), a status payload, the
size and JSON decoding, the shape (one object, a batch array or a SenML pack, see
:mod:`.senml`), then each item's fields (:mod:`.telemetry_item`) and its timestamp against the
receiving clock: not more than ``future_tolerance_s`` ahead of it.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any

import orjson
from pydantic import ValidationError

from tecfleet.ingest.db import Reading, Reject, StatusUpdate
from tecfleet.ingest.senml import is_senml, senml_items
from tecfleet.ingest.telemetry_item import describe_errors, validate_item

DEVICE_ID_RE = re.compile(r"^[A-Za-z0-9_.\-]{1,64}$")


@dataclass
class Parsed:
    """What one MQTT message turned into."""

    readings: list[Reading] = field(default_factory=list)
    rejects: list[Reject] = field(default_factory=list)
    status: StatusUpdate | None = None


@dataclass(frozen=True, slots=True)
class _Message:
    """Topic and payload of the message being parsed, for the rejects it produces."""

    topic: str
    payload: bytes
    device_id: str

    def reject(
        self, code: str, reason: str, raw: bytes | None = None, item: int | None = None
    ) -> Reject:
        payload = self.payload if raw is None else raw
        return Reject(self.topic, payload, code, reason, self.device_id, item)


def split_topic(topic: str, prefix: str) -> tuple[str, str] | None:
    """(device_id, kind) of ``<prefix>/<device_id>/<kind>``, or None when it is not ours."""
    head = prefix + "/"
    if not topic.startswith(head):
        return None
    rest = topic[len(head) :].split("/")
    if len(rest) != 2:
        return None
    return rest[0], rest[1]


def parse_message(
    topic: str,
    payload: bytes,
    *,
    prefix: str,
    now_s: float,
    future_tolerance_s: float = 300.0,
    max_payload_bytes: int = 1_048_576,
) -> Parsed:
    """Turn one MQTT message into readings, rejects and status changes. Never raises."""
    out = Parsed()
    where = _route(topic, payload, prefix)
    if isinstance(where, Reject):
        out.rejects.append(where)
        return out
    device_id, kind = where
    message = _Message(topic, payload, device_id)
    if kind == "status":
        _read_status(message, now_s, out)
        return out
    if kind != "telemetry":
        out.rejects.append(message.reject("bad_topic", f"unknown topic kind {kind[:40]!r}"))
        return out
    doc, refused = _decode(message, max_payload_bytes)
    if refused is not None:
        out.rejects.append(refused)
        return out
    shaped = _items_of(doc, message, now_s, out)
    if shaped is None:
        return out
    items, single = shaped
    limit_s = now_s + future_tolerance_s
    for index, item in enumerate(items):
        item_no = None if single else index
        outcome = _check_item(item, message, item_no, now_s, limit_s, future_tolerance_s)
        if isinstance(outcome, Reject):
            out.rejects.append(outcome)
        else:
            out.readings.append(outcome)
    return out


def _route(topic: str, payload: bytes, prefix: str) -> tuple[str, str] | Reject:
    """(device_id, kind) of a topic of ours with a valid device id, else the reject."""
    where = split_topic(topic, prefix)
    if where is None:
        reason = f"topic {topic[:200]!r} is not {prefix}/<device_id>/telemetry"
        return Reject(topic, payload, "bad_topic", reason)
    device_id, _kind = where
    if not DEVICE_ID_RE.match(device_id):
        reason = f"device id {device_id[:80]!r} must match [A-Za-z0-9_.-]{{1,64}}"
        return Reject(topic, payload, "bad_device_id", reason)
    return where


def _read_status(message: _Message, now_s: float, out: Parsed) -> None:
    status_text = bytes(message.payload).strip().lower()
    if status_text in (b"online", b"offline"):
        out.status = StatusUpdate(message.device_id, status_text.decode(), int(now_s * 1000))
    elif status_text:
        out.rejects.append(
            message.reject("bad_status", "status payload must be 'online' or 'offline'")
        )


def _decode(message: _Message, max_payload_bytes: int) -> tuple[Any, Reject | None]:
    """The decoded JSON document, or the reject of an oversized or undecodable payload."""
    payload = message.payload
    if len(payload) > max_payload_bytes:
        reason = f"{len(payload)} bytes, limit {max_payload_bytes}"
        return None, message.reject("payload_too_large", reason)
    try:
        # orjson checks the UTF-8 itself; the slower decode only runs to explain a refusal.
        return orjson.loads(payload), None
    except orjson.JSONDecodeError as exc:
        try:
            payload.decode("utf-8")
        except UnicodeDecodeError as bad:
            code, why = "not_utf8", f"payload is not UTF-8: {bad.reason} at byte {bad.start}"
        else:
            code, why = "invalid_json", f"payload is not JSON: {exc}"
        return None, message.reject(code, why)


def _items_of(
    doc: Any, message: _Message, now_s: float, out: Parsed
) -> tuple[list[Any], bool] | None:
    """(items, whether the payload is one object) by the document's shape; None if refused."""
    items: list[Any]
    if is_senml(doc):
        items, problems = senml_items(doc, now_s)
        for reason_code, text in problems:
            out.rejects.append(message.reject(reason_code, text))
        if not items and not problems:
            out.rejects.append(message.reject("senml_error", "SenML pack holds no readings"))
        return items, False
    if isinstance(doc, dict):
        return [doc], True
    if isinstance(doc, list):
        if not doc:
            out.rejects.append(message.reject("empty_batch", "batch array is empty"))
        return doc, False
    out.rejects.append(
        message.reject(
            "wrong_shape", "payload must be a JSON object, an array of objects or a SenML pack"
        )
    )
    return None


#: Reading fields after device and time, filled from the validated item by name.
_VALUE_FIELDS = Reading._fields[2:]


def _check_item(
    item: Any,
    message: _Message,
    item_no: int | None,
    now_s: float,
    limit_s: float,
    future_tolerance_s: float,
) -> Reading | Reject:
    """One item's reading, or the reject naming what is wrong with it."""
    device_id = message.device_id
    if not isinstance(item, dict):
        return _refuse(message, item, item_no, "wrong_shape", "batch item is not a JSON object")
    claimed = item.get("device_id")
    if claimed is not None and claimed != device_id:
        return _refuse(
            message,
            item,
            item_no,
            "device_mismatch",
            f"payload names device {str(claimed)[:64]!r} but the topic names {device_id!r}",
        )
    try:
        valid = validate_item(item)
    except ValidationError as exc:
        return _refuse(message, item, item_no, *describe_errors(exc))
    ts_s: float = valid["ts"]
    if ts_s > limit_s:
        return _refuse(
            message,
            item,
            item_no,
            "future_timestamp",
            f"ts is {ts_s - now_s:.0f} s ahead of the receiving clock "
            f"(limit {future_tolerance_s:.0f} s)",
        )
    return Reading._make((device_id, round(ts_s * 1000.0), *map(valid.get, _VALUE_FIELDS)))


def _refuse(message: _Message, item: Any, item_no: int | None, code: str, reason: str) -> Reject:
    # A batch item is kept on its own; it is serialised again only when refused.
    raw = None if item_no is None else orjson.dumps(item)
    return message.reject(code, reason, raw, item_no)

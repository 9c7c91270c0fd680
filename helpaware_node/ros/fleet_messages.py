"""The documents robots exchange on `fleet/outcomes` (no rclpy here): encode and decode.

One std_msgs/String JSON document per message (format in docs/store.md):
  {"v": 1, "kind": "outcome", "event_id": ..., "person_key": ..., "time_s": ...,
   "result": ..., "busyness": ..., "ask_load": ..., "request_kind": ...}
  {"v": 1, "kind": "ask", "event_id": ..., "person_key": ..., "time_s": ...,
   "request_kind": ..., "request_id": ...}
  {"v": 1, "kind": "forget", "person_key": ..., "from": "<robot_id>"}
Only hashed person keys travel; a message with anything else is refused. Every document is
serialised by `encode_message` and parsed by `decode`, the one place for an envelope (a
signature, say) to be added. Peers are untrusted: every field is checked as the store checks
its own events, and a bad document raises CoreInputError naming the field.
"""
from __future__ import annotations

import json
from typing import Any, Union

from ..core import CoreInputError, Result
from ..store.base import AskEvent, StoredEvent
from ..store.sqlite import PERSON_KEY_RE, check_ask, check_event
from ..wire import lone_surrogate_at

FORMAT_VERSION = 1
KINDS = ("outcome", "ask", "forget")
EVENT_TEXT_FIELDS = ("kind", "event_id", "person_key", "result", "request_kind", "request_id",
                     "from")

Decoded = Union[tuple[str, StoredEvent], tuple[str, AskEvent], tuple[str, str]]


def encode_message(kind: str, fields: dict[str, Any]) -> str:
    """The one serialisation of every fleet document."""
    return json.dumps({"v": FORMAT_VERSION, "kind": kind, **fields},
                      separators=(",", ":"), sort_keys=True)


def encode_event(e: StoredEvent) -> str:
    check_event(e)       # refuses anything but a hashed key
    return encode_message("outcome", {
        "event_id": e.event_id, "person_key": e.person_key, "time_s": float(e.time_s),
        "result": Result(e.result).value, "busyness": float(e.busyness),
        "ask_load": float(e.ask_load), "request_kind": e.request_kind or ""})


def encode_ask(a: AskEvent) -> str:
    check_ask(a)
    return encode_message("ask", {
        "event_id": a.event_id, "person_key": a.person_key, "time_s": float(a.time_s),
        "request_kind": a.request_kind, "request_id": a.request_id})


def encode_any(e: Union[StoredEvent, AskEvent]) -> str:
    return encode_ask(e) if isinstance(e, AskEvent) else encode_event(e)


def encode_forget(person_key: str, robot_id: str) -> str:
    if not PERSON_KEY_RE.match(person_key or ""):
        raise CoreInputError("person_key: expected 64 lowercase hex digits")
    return encode_message("forget", {"person_key": person_key, "from": robot_id})


def load_json(text: str, what: str):
    """Parsed JSON, or CoreInputError (too deep nesting included)."""
    try:
        return json.loads(text)
    except (ValueError, RecursionError) as exc:
        raise CoreInputError(f"{what}: not JSON ({str(exc)[:80]})") from None


def refuse_surrogates(doc: dict, what: str, fields: tuple) -> None:
    """A lone surrogate (JSON "\\ud800") cannot be hashed, stored in SQLite or published."""
    for name in fields:
        value = doc.get(name)
        if isinstance(value, str) and lone_surrogate_at(value) is not None:
            raise CoreInputError(f"{what}: {name} is not valid Unicode text (a lone surrogate)")


def _text(doc: dict, name: str, default: Any = None) -> str:
    value = doc.get(name, default) if default is not None else doc[name]
    if not isinstance(value, str):
        raise CoreInputError(f"fleet message: {name} must be text, got {type(value).__name__}")
    return value


def decode(text: str) -> Decoded:
    """('outcome', StoredEvent), ('ask', AskEvent) or ('forget', key); raises CoreInputError
    on a bad document."""
    doc = load_json(text, "fleet message")
    if not isinstance(doc, dict) or doc.get("v") != FORMAT_VERSION:
        raise CoreInputError(f"fleet message: expected a JSON object with v={FORMAT_VERSION}")
    refuse_surrogates(doc, "fleet message", EVENT_TEXT_FIELDS)
    kind = doc.get("kind")
    if kind == "forget":
        key = doc.get("person_key", "")
        if not isinstance(key, str) or not PERSON_KEY_RE.match(key):
            raise CoreInputError("fleet message: person_key must be 64 lowercase hex digits")
        return "forget", key
    if kind not in KINDS:
        raise CoreInputError(f"fleet message: kind {kind!r} is not one of {', '.join(KINDS)}")
    try:
        if kind == "ask":
            a = AskEvent(_text(doc, "event_id"), _text(doc, "person_key"), doc["time_s"],
                         _text(doc, "request_kind", ""), _text(doc, "request_id", ""))
            check_ask(a)
            return "ask", AskEvent(a.event_id, a.person_key, float(a.time_s), a.request_kind,
                                   a.request_id)
        e = StoredEvent(str(doc["event_id"]), str(doc["person_key"]), doc["time_s"],
                        Result.parse(str(doc["result"])), doc["busyness"], doc["ask_load"],
                        str(doc.get("request_kind", "")))
        check_event(e)
    except KeyError as exc:
        raise CoreInputError(f"fleet message: missing field {exc.args[0]}") from None
    except OverflowError:   # an integer beyond any float in time_s, busyness or ask_load
        raise CoreInputError("fleet message: time_s, busyness and ask_load must be finite "
                             "numbers in range") from None
    return "outcome", e

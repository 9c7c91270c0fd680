# Copyright 2026 The helpaware_node authors
#
# Licensed under the Apache License, Version 2.0 (the "License");
# you may not use this file except in compliance with the License.
# You may obtain a copy of the License at
#
#     http://www.apache.org/licenses/LICENSE-2.0
#
# Unless required by applicable law or agreed to in writing, software
# distributed under the License is distributed on an "AS IS" BASIS,
# WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
# See the License for the specific language governing permissions and
# limitations under the License.

"""Fleet and privacy documents: one encoder and one decoder for every kind, signed (no rclpy).

Format v2 (docs/store.md, "Fleet exchange"; signatures in docs/security.md).  Every document:
  {"v": 2, "kind": <kind>, ...the kind's own fields..., "site": ..., "key_id": ..., "sig": ...}
where `sig` is the HMAC of signing.canonical_bytes over the whole document but `sig`.  Kinds:
  outcome  event_id, person_key, time_s, result, busyness, ask_load, request_kind
  ask      event_id, person_key, time_s, request_kind, request_id   (an ask, before its outcome)
  forget   id, person_key, from, request_id, issued_s     (a privacy act: erase the person)
  opt_out  id, person_key, from, request_id, issued_s     (a privacy act: never learn again)
A new kind is one entry in KINDS (its fields, and the two functions between value and fields).

Only hashed person keys travel; a document with anything else is refused.  Refusals raise
CoreInputError naming the field; signature refusals raise signing.Refused with a reason
(unsigned, other_site, unknown_key, expired_key, bad_signature), and a document of the
unsigned format v1 of older robots raises Refused(OLD_FORMAT) with a message saying so.
Unknown extra fields are covered by the signature and otherwise ignored.
"""
from __future__ import annotations

from dataclasses import dataclass
import json
import secrets
import time
from typing import Any, Callable, Mapping, Optional

from .core import CoreInputError, Result
from .core.preview import describe, quoted
from .signing import KeyRing, Refused, SIGNATURE_FIELDS
from .store.base import AskEvent, StoredEvent
from .store.ids import check_ask, check_event, check_text, PERSON_KEY_RE
from .wire import MAX_ID_CHARS, parse_json, WireError

FORMAT_VERSION = 2
UNSIGNED_VERSION = 1          # the format before signatures: refused, with a message saying so
OLD_FORMAT = "old_format"     # the refusal reason for it
MALFORMED = "malformed"       # a bad field (any refusal that is not about the signature)
MAX_DOCUMENT_CHARS = 100_000
PRIVACY_KINDS = ("forget", "opt_out")
WHAT = "fleet message"


def refusal_reason(exc: CoreInputError) -> str:
    """Return the /diagnostics bucket of a refusal.

    a signature reason, old_format, or malformed.
    """
    return getattr(exc, "reason", MALFORMED)


# ---------------------------------------------------------------------------- values
@dataclass(frozen=True)
class PrivacyAct:
    """A forget or an opt-out, as the console sends it and as robots pass it on.

    `request_id` names the request the act belongs to: the console's request has its own id
    there, a robot's answer carries the id of the request it applied, and an opt-out a robot
    re-offers at start has none.  Each robot applies one request once (`identity`).
    """

    action: str         # "forget" or "opt_out" (the document kind)
    person_key: str
    sender: str         # robot id, or the console's name
    act_id: str         # unique id of this document: "<sender>/<16 hex>"
    request_id: str     # the request this act belongs to ("" for a re-offered opt-out)
    issued_s: float     # when the sender made it, seconds since the epoch

    @property
    def identity(self) -> str:
        return self.request_id or self.act_id

    @classmethod
    def new(cls, action: str, person_key: str, sender: str, request_id: Optional[str] = None,
            issued_s: Optional[float] = None) -> "PrivacyAct":
        """Return a fresh act; `request_id=None` makes it a request of its own."""
        act_id = f"{sender}/{secrets.token_hex(8)}"
        return cls(action, person_key, sender, act_id,
                   act_id if request_id is None else request_id,
                   time.time() if issued_s is None else float(issued_s))


# ---------------------------------------------------------------------------- kinds
@dataclass(frozen=True)
class Kind:
    fields: tuple                          # the kind's own fields, for docs and the fuzz
    to_fields: Callable[[Any], dict]
    from_fields: Callable[[Mapping], Any]  # raises CoreInputError naming the field


def _outcome_fields(e: StoredEvent) -> dict:
    return {"event_id": e.event_id, "person_key": e.person_key, "time_s": float(e.time_s),
            "result": Result(e.result).value, "busyness": float(e.busyness),
            "ask_load": float(e.ask_load), "request_kind": e.request_kind or ""}


def _number(doc: Mapping, name: str) -> float:
    """Return a number field as float.

    Or CoreInputError naming it (missing, not a number, beyond any float); its range is the store's
    check.
    """
    if name not in doc:
        raise CoreInputError(f"{WHAT}: missing field {name}")
    value = doc[name]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise CoreInputError(f"{WHAT}: {name} must be a number, got {describe(value)}")
    try:
        return float(value)
    except OverflowError:   # an integer beyond any float
        raise CoreInputError(f"{WHAT}: {name} is {describe(value)}, beyond any finite "
                             "number") from None


def _text(doc: Mapping, name: str, default: Optional[str] = None) -> str:
    """Return a text field (its length and content are the store's checks), or CoreInputError."""
    if name not in doc:
        if default is None:
            raise CoreInputError(f"{WHAT}: missing field {name}")
        return default
    value = doc[name]
    if not isinstance(value, str):
        raise CoreInputError(f"{WHAT}: {name} must be text, got {describe(value)}")
    return value


def _outcome_from(doc: Mapping) -> StoredEvent:
    e = StoredEvent(_text(doc, "event_id"), _text(doc, "person_key"), _number(doc, "time_s"),
                    Result.parse(_text(doc, "result")), _number(doc, "busyness"),
                    _number(doc, "ask_load"), _text(doc, "request_kind", ""))
    check_event(e)          # names the field: person_key, event_id, request_kind, ranges
    return e


def _ask_fields(a: AskEvent) -> dict:
    return {"event_id": a.event_id, "person_key": a.person_key, "time_s": float(a.time_s),
            "request_kind": a.request_kind, "request_id": a.request_id}


def _ask_from(doc: Mapping) -> AskEvent:
    a = AskEvent(_text(doc, "event_id"), _text(doc, "person_key"), _number(doc, "time_s"),
                 _text(doc, "request_kind", ""), _text(doc, "request_id", ""))
    check_ask(a)            # names the field: person_key, event_id, time_s, request_*
    return a


def _act_fields(act: PrivacyAct) -> dict:
    return {"id": act.act_id, "person_key": act.person_key, "from": act.sender,
            "request_id": act.request_id, "issued_s": float(act.issued_s)}


def _text_field(doc: Mapping, name: str, low: int = 0) -> str:
    value = doc.get(name)
    if not isinstance(value, str) or not low <= len(value) <= MAX_ID_CHARS:
        raise CoreInputError(f"{WHAT}: {name} must be text of {low} to {MAX_ID_CHARS} characters")
    return check_text(name, value, MAX_ID_CHARS)


def _act_from(kind: str) -> Callable[[Mapping], PrivacyAct]:
    def build(doc: Mapping) -> PrivacyAct:
        key = doc.get("person_key")
        if not isinstance(key, str) or not PERSON_KEY_RE.match(key):
            raise CoreInputError(f"{WHAT}: person_key must be 64 lowercase hex digits")
        issued = doc.get("issued_s")
        if isinstance(issued, bool) or not isinstance(issued, (int, float)) or not (
                0.0 <= float(issued) < 1e12):
            raise CoreInputError(f"{WHAT}: issued_s must be seconds since the epoch in "
                                 "[0, 1e12)")
        return PrivacyAct(kind, key, _text_field(doc, "from", 1), _text_field(doc, "id", 1),
                          _text_field(doc, "request_id"), float(issued))
    return build


ACT_FIELDS = ("id", "person_key", "from", "request_id", "issued_s")
KINDS: dict[str, Kind] = {
    "outcome": Kind(("event_id", "person_key", "time_s", "result", "busyness", "ask_load",
                     "request_kind"), _outcome_fields, _outcome_from),
    "ask": Kind(("event_id", "person_key", "time_s", "request_kind", "request_id"),
                _ask_fields, _ask_from),
    "forget": Kind(ACT_FIELDS, _act_fields, _act_from("forget")),
    "opt_out": Kind(ACT_FIELDS, _act_fields, _act_from("opt_out")),
}


# ---------------------------------------------------------------------------- the pair
def encode_document(kind: str, value: Any, keys: KeyRing) -> str:
    """Return the signed JSON text of `value` as a `kind` document (checked as it is read)."""
    if kind not in KINDS:
        raise CoreInputError(f"{WHAT}: kind {kind!r} is not one of {', '.join(KINDS)}")
    doc = {"v": FORMAT_VERSION, "kind": kind, **KINDS[kind].to_fields(value)}
    KINDS[kind].from_fields(doc)        # refuses a raw id or a bad field before it travels
    return json.dumps(keys.sign(doc), separators=(",", ":"), sort_keys=True, allow_nan=False)


def decode_document(text: Any, keys: KeyRing, now_s: Optional[float] = None,
                    what: str = WHAT) -> tuple[str, Any]:
    """(kind, value) of a signed document.

    StoredEvent for outcome, AskEvent for ask, PrivacyAct for forget and opt_out.  The signature is
    checked before any field is looked at.
    """
    return decode_parsed(load_document(text, what), keys, now_s, what)


def load_document(text: Any, what: str = WHAT) -> dict:
    """Return the JSON object in `text` (duplicate names and NaN/Infinity refused)."""
    if not isinstance(text, str):
        raise CoreInputError(f"{what}: expected text, got {type(text).__name__}")
    if len(text) > MAX_DOCUMENT_CHARS:
        raise CoreInputError(f"{what}: JSON text longer than {MAX_DOCUMENT_CHARS} characters")
    try:
        doc = parse_json(text)
    except WireError as exc:      # "document: ..." (not JSON, NaN, a repeated name)
        reason = str(exc).removeprefix("document: ")
        raise CoreInputError(f"{what}: {reason}" if "JSON" in reason
                             else f"{what}: not valid JSON ({reason})") from None
    if not isinstance(doc, dict):
        raise CoreInputError(f"{what}: expected a JSON object")
    return doc


def decode_parsed(doc: Mapping, keys: KeyRing, now_s: Optional[float] = None,
                  what: str = WHAT) -> tuple[str, Any]:
    version = doc.get("v")
    if version == UNSIGNED_VERSION and not isinstance(version, bool):
        raise Refused(OLD_FORMAT, f"{what}: v=1, the unsigned format of older versions, from "
                      f"{_sender(doc)}: refused. This robot takes only signed v=2 documents; "
                      "update helpaware_node on that robot (docs/store.md, 'Migration to signed "
                      "documents')")
    if version != FORMAT_VERSION or isinstance(version, bool):
        raise CoreInputError(f"{what}: v must be {FORMAT_VERSION} (got {describe(version)})")
    keys.check(doc, time.time() if now_s is None else now_s, what)
    kind = doc.get("kind")
    if not isinstance(kind, str) or kind not in KINDS:
        raise CoreInputError(f"{what}: kind {quoted(kind)} is not one of {', '.join(KINDS)}")
    try:
        return kind, KINDS[kind].from_fields(doc)
    except CoreInputError as exc:   # every refusal names the topic, then the field
        raise CoreInputError(f"{what}: {str(exc).removeprefix(f'{WHAT}: ')}") from None


def _sender(doc: Mapping) -> str:
    sender = doc.get("from")
    if not isinstance(sender, str):
        event_id = doc.get("event_id")
        sender = event_id.rpartition("/")[0] if isinstance(event_id, str) else ""
    sender = sender[:64] if sender and sender.isprintable() else ""
    return f"robot {sender!r}" if sender else "an old peer"


# ---------------------------------------------------------------------------- privacy topic
# a privacy request older (or newer) than this is refused as a replay (common practice for
# signed requests, no source; the sender's and the robot's clocks must agree to within it)
REQUEST_MAX_AGE_S = 600.0


def check_fresh(act: PrivacyAct, now_s: float, what: str) -> None:
    if abs(now_s - act.issued_s) > REQUEST_MAX_AGE_S:
        raise CoreInputError(f"{what}: issued_s is {now_s - act.issued_s:+.0f} s from this "
                             f"robot's clock (at most {REQUEST_MAX_AGE_S:.0f} s): a replayed "
                             "request, or a clock to set")


def parse_unsigned_request(doc: Mapping, key_for: Callable[[str], str],
                           what: str) -> tuple[str, str]:
    """Return (action, person_key) of an unsigned lab request.

    (action, person_key) of an unsigned lab request {"action": "opt_out"|"forget",
    "person_id"|"person_key": ...}; a perceived id is hashed at once and never kept or logged.
    """
    for name in ("action", "person_id", "person_key"):
        value = doc.get(name)
        if isinstance(value, str):
            try:
                value.encode("utf-8")
            except UnicodeEncodeError:
                raise CoreInputError(f"{what}: {name} is not valid Unicode text (a lone "
                                     "surrogate)") from None
            if len(value) > MAX_ID_CHARS:      # like a perceived id on the people topic
                raise CoreInputError(f"{what}: {name}: {len(value)} characters, at most "
                                     f"{MAX_ID_CHARS} allowed")
    action = doc.get("action")
    if action not in PRIVACY_KINDS:
        raise CoreInputError(f"{what}: action {quoted(action)} is not one of "
                             f"{', '.join(PRIVACY_KINDS)}")
    if isinstance(doc.get("person_key"), str):
        key = doc["person_key"].strip().lower()
        if not PERSON_KEY_RE.match(key):
            raise CoreInputError(f"{what}: person_key must be 64 hex digits")
    elif isinstance(doc.get("person_id"), str) and doc["person_id"]:
        key = key_for(doc["person_id"])
    else:
        raise CoreInputError(f"{what}: give person_id (perceived id) or person_key")
    return action, key


__all__ = ["FORMAT_VERSION", "UNSIGNED_VERSION", "OLD_FORMAT", "MALFORMED", "KINDS", "Kind",
           "PrivacyAct", "SIGNATURE_FIELDS", "encode_document", "decode_document",
           "decode_parsed", "load_document", "refusal_reason", "check_fresh",
           "parse_unsigned_request", "REQUEST_MAX_AGE_S", "PRIVACY_KINDS"]

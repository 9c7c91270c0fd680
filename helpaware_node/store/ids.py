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

"""What may enter a store: robot ids, event ids, person keys and the text of events and asks.

One set of checks for the store's own writes and for every peer's document (fleet_documents
decodes with them), so an event the fleet takes is one the store can hold: SQLite keeps a
sequence in a signed 64-bit integer, and the store notes `sequence + 1` for its own robot, so a
sequence beyond that range, or digits that are not ASCII (`'²'.isdigit()` is true, `int('²')`
fails), would make a write raise after the event was taken.  Each refusal is a CoreInputError
naming the field and what is allowed, with a bounded preview of the value.
"""
from __future__ import annotations

import functools
import re
import sqlite3
from typing import Any, TYPE_CHECKING

from ..core.model import check_range, CoreInputError
from ..core.preview import quoted
from ..wire import lone_surrogate_at, MAX_ID_CHARS, MAX_LABEL_CHARS

if TYPE_CHECKING:   # base.py imports this module
    from .base import AskEvent, StoredEvent
    from ..core import OutcomeEvent

MAX_ROBOT_ID_CHARS = 64            # a host name label is at most 63 characters
MAX_SEQUENCE = 2 ** 63 - 2         # SQLite INTEGER is at most 2**63 - 1; the store keeps seq + 1
MAX_SEQUENCE_DIGITS = len(str(MAX_SEQUENCE))
MAX_EVENT_ID_CHARS = MAX_ROBOT_ID_CHARS + 1 + MAX_SEQUENCE_DIGITS
PERSON_KEY_RE = re.compile(r"^[0-9a-f]{64}$")
_SEQUENCE_RE = re.compile(r"^(0|[1-9][0-9]*)$")   # ASCII digits, no sign, no leading zero
ROBOT_ID_RULE = (f"1 to {MAX_ROBOT_ID_CHARS} printable characters without '/' or "
                 "surrounding spaces")


def robot_id_problem(value: Any) -> str:
    """Why `value` is not a robot id ('' when it is one): ROBOT_ID_RULE."""
    if not isinstance(value, str):
        return "must be text"
    if not value:
        return "is empty"
    if len(value) > MAX_ROBOT_ID_CHARS:
        return f"has {len(value)} characters"
    if "/" in value:
        return "contains '/'"
    if not value.isprintable():       # control characters, lone surrogates, line breaks
        return "holds a character that is not printable"
    if value != value.strip():
        return "starts or ends with a space"
    return ""


# an outcome's event id is checked at every append: a fleet has a few robot ids, so each is
# checked once (text only: the cache never holds other types)
_robot_id_problem_of_text = functools.lru_cache(maxsize=1024)(robot_id_problem)


def check_robot_id(value: Any, name: str = "robot_id") -> str:
    """`value` if it is a robot id, else CoreInputError naming `name` and the rule."""
    problem = robot_id_problem(value)
    if problem:
        raise CoreInputError(f"{name}: {quoted(value)} {problem}; a robot id is "
                             f"{ROBOT_ID_RULE}")
    return str(value)


def check_event_id(value: Any, name: str = "event_id") -> tuple[str, int]:
    """(robot id, sequence) of an event id '<robot_id>/<sequence>', or CoreInputError."""
    if not isinstance(value, str) or len(value) > MAX_EVENT_ID_CHARS or "/" not in value:
        raise CoreInputError(f"{name}: {quoted(value)} is not '<robot_id>/<sequence>' (text "
                             f"of at most {MAX_EVENT_ID_CHARS} characters)")
    robot, _, seq = value.rpartition("/")
    problem = _robot_id_problem_of_text(robot)
    if problem:
        raise CoreInputError(f"{name}: {quoted(value)}: the robot id {problem} (a robot id "
                             f"is {ROBOT_ID_RULE})")
    if (not _SEQUENCE_RE.match(seq) or not seq.isascii() or len(seq) > MAX_SEQUENCE_DIGITS
            or int(seq) > MAX_SEQUENCE):
        raise CoreInputError(f"{name}: {quoted(value)}: the sequence {quoted(seq)} is not "
                             f"ASCII digits for a number in [0, {MAX_SEQUENCE}] without "
                             "leading zeros")
    return robot, int(seq)


def check_text(name: str, value: Any, max_chars: int) -> str:
    """Text of at most `max_chars` characters that UTF-8 can hold (no lone surrogate)."""
    if not isinstance(value, str):
        raise CoreInputError(f"{name}: expected text of at most {max_chars} characters, got "
                             f"{quoted(value)}")
    if len(value) > max_chars:
        raise CoreInputError(f"{name}: {len(value)} characters, at most {max_chars} allowed")
    at = lone_surrogate_at(value)
    if at is not None:
        raise CoreInputError(f"{name}: not valid Unicode text (lone surrogate at character "
                             f"{at})")
    return value


def check_person_key(value: Any) -> str:
    if not isinstance(value, str) or not PERSON_KEY_RE.match(value):
        raise CoreInputError("person_key: expected 64 lowercase hex digits (HMAC-SHA256 of the "
                             "perceived id); raw ids are never stored")
    return value


def check_event(event: "StoredEvent") -> "OutcomeEvent":
    """Refuse anything that is not a hashed key or a well-formed outcome (names the field).

    Returns the event's OutcomeEvent (built once: the fold reuses it).
    """
    check_person_key(event.person_key)
    check_event_id(event.event_id)
    check_text("request_kind", event.request_kind or "", MAX_LABEL_CHARS)
    return event.to_outcome()   # validates time, busyness, ask load and result ranges


def check_ask(ask: "AskEvent") -> None:
    """Refuse an ask that is not keyed like an event (names the field and the allowed range)."""
    check_person_key(ask.person_key)
    check_event_id(ask.event_id)
    check_range("time_s", ask.time_s, -1e15, 1e15)
    check_text("request_kind", ask.request_kind, MAX_LABEL_CHARS)
    check_text("request_id", ask.request_id, MAX_ID_CHARS)


def refused_by_store(exc: BaseException) -> bool:
    """Tell whether a failed write is the store's condition rather than one event's fault.

    Whether a failed write is the store's condition (disk full, read-only, I/O error, locked,
    damaged, out of memory: keep the events and try again) rather than one event's fault (a value
    the store cannot hold: drop that event).
    """
    if isinstance(exc, (sqlite3.IntegrityError, sqlite3.DataError, sqlite3.InterfaceError,
                        sqlite3.ProgrammingError)):
        return False
    return isinstance(exc, (sqlite3.DatabaseError, OSError, MemoryError))

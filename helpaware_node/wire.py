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

"""Versioned JSON documents carried in std_msgs/String on the node's topics (no rclpy here).

Documents: `people`, `task_status`, `outcome` (inputs) and `decision` (output).  Each has
`doc` (its name) and `version`; every field is checked by one table (`SPECS`), which also
produces the JSON Schema files under docs/schemas/, so code and schemas cannot drift apart.
Errors are `WireError` (a ValueError) naming the field path and the allowed range.

The decision document carries everything needed to rebuild the exact core inputs
(`replay_inputs`) and the parameter values in force (`recorded_params`), so an offline review
can re-run `core.policy.decide` and get the recorded action and person back.
"""
from __future__ import annotations

from dataclasses import dataclass, field
import functools
import json
import math
import re
from typing import Any, Iterable, Mapping, NoReturn, Optional, Sequence

import numpy as np

from .core.belief import Belief
from .core.model import DecisionConfig, from_plain, MAX_ASKS_CAP, SiteModel, to_plain
from .core.person import Result
from .core.policy import Candidate, Decision, HelpNeed, HOUR_S
from .core.preview import describe, quoted, short_name, short_number

try:      # optional (pip extra "fast"): writes a 200-candidate decision ~10x faster
    import orjson
except ImportError:   # pragma: no cover - the standard library does the same, slower
    orjson = None  # type: ignore[assignment, unused-ignore]   # None: tested where used

VERSION = 1
MAX_DOCUMENT_BYTES = 1_000_000
MAX_PEOPLE = 500
MAX_ID_CHARS = 128
MAX_LABEL_CHARS = 64
MAX_TEXT_CHARS = 256
MAX_TIMES = MAX_ASKS_CAP     # every ask a cap counts fits in a decision document
MAX_CANDIDATES = MAX_PEOPLE
TIME_LIMIT_S = 1e15
BIG = 1e15

TASK_STATES = ("open", "resolved", "cancelled")
RESULTS = tuple(r.value for r in Result)
ACTIONS = ("ask", "continue")


class WireError(ValueError):
    """A document is not valid; the message names the field and what is allowed."""


# ----------------------------------------------------------------------------------------
# One small field-spec language; both the validator and the JSON Schema come from it.

@dataclass(frozen=True)
class F:
    # string | number | integer | boolean | enum | array | object | any_object
    kind: str
    required: bool = True
    nullable: bool = False
    low: float = -BIG
    high: float = BIG
    low_open: bool = False
    min_len: int = 0
    max_len: int = MAX_TEXT_CHARS
    choices: tuple[Any, ...] = ()
    items: Optional["F"] = None
    fields: Mapping[str, "F"] = field(default_factory=dict)
    description: str = ""


def _id(desc: str, **kw: Any) -> F:
    return F("string", min_len=1, max_len=MAX_ID_CHARS, description=desc, **kw)


def _time(desc: str, **kw: Any) -> F:
    return F("number", low=-TIME_LIMIT_S, high=TIME_LIMIT_S, description=desc, **kw)


def _header(name: str) -> dict[str, Any]:
    return {"doc": F("enum", choices=(name,), description="document name"),
            "version": F("enum", choices=(VERSION,), description="document version")}


PERSON = F("object", fields={
    "id": _id("perceived person id (opaque, from perception)"),
    "distance_m": F("number", low=0.0, high=1e6, description="distance from the robot, metres"),
    "busyness": F("number", required=False, nullable=True, low=0.0, high=1.0,
                  description="busyness in [0, 1]; null or absent: the site default"),
    "activity": F("string", required=False, max_len=MAX_LABEL_CHARS,
                  description="activity label, e.g. charting, with_patient"),
    "position": F("array", required=False, items=F("number"), min_len=3, max_len=3,
                  description="[x, y, z] in frame_id, metres"),
})

PEOPLE = F("object", fields={
    **_header("people"),
    "stamp_s": _time("time of the observation, seconds (node clock)"),
    "frame_id": F("string", required=False, max_len=MAX_LABEL_CHARS,
                  description="frame of the positions"),
    "people": F("array", items=PERSON, max_len=MAX_PEOPLE, description="people in view"),
})

TASK_STATUS = F("object", fields={
    **_header("task_status"),
    "request_id": _id("help need id, unique per robot"),
    "state": F("enum", choices=TASK_STATES, description="open, resolved or cancelled"),
    "kind": F("string", required=False, min_len=1, max_len=MAX_LABEL_CHARS,
              description="request kind, e.g. door, elevator (required when state is open)"),
    "urgency": F("number", required=False, low=0.0, high=1.0, description="urgency in [0, 1]"),
    "continue_cost_s": F("number", required=False, nullable=True, low=0.0, high=1e9,
                         description="override of the cost of continuing alone, seconds"),
    "help_time_s": F("number", required=False, nullable=True, low=0.0, high=1e9,
                     description="override of the seconds a successful ask takes"),
    "stamp_s": _time("time of the status, seconds", required=False),
})

OUTCOME = F("object", fields={
    **_header("outcome"),
    "request_id": _id("help need id the ask belonged to"),
    "person_id": _id("perceived id of the person asked"),
    "result": F("enum", choices=RESULTS, description="what happened"),
    "stamp_s": _time("time of the outcome, seconds", required=False),
})

NEED = F("object", fields={
    "request_id": _id("help need id"),
    "kind": F("string", min_len=1, max_len=MAX_LABEL_CHARS, description="request kind"),
    "urgency": F("number", low=0.0, high=1.0, description="urgency"),
    "continue_cost_s": F("number", nullable=True, low=0.0, high=1e9,
                         description="override or null"),
    "help_time_s": F("number", nullable=True, low=0.0, high=1e9, description="override or null"),
    "opened_at_s": _time("when the need opened, seconds"),
})

TIMES = F("array", items=_time("time, seconds"), max_len=MAX_TIMES)

CANDIDATE = F("object", fields={
    "person_id": _id("perceived id"),
    "distance_m": F("number", low=0.0, high=1e6, description="metres"),
    "observed_at_s": _time("time of the observation used"),
    "a": F("number", low=0.0, low_open=True, high=1e12, description="belief a as used"),
    "b": F("number", low=0.0, low_open=True, high=1e12, description="belief b as used"),
    "busyness": F("number", nullable=True, low=0.0, high=1.0, description="null: site default"),
    "activity": F("string", max_len=MAX_LABEL_CHARS, description="activity label"),
    "ask_times_s": TIMES,
    "candidate_count": F("integer", low=0, high=1e12, description="earlier needs as candidate"),
    "first_seen_s": _time("first time seen as candidate", nullable=True),
    "opted_out": F("boolean", description="on the opt-out list"),
})

RATIONALE_ROW = F("object", fields={
    "person_id": _id("perceived id"),
    "excluded": F("string", nullable=True, max_len=MAX_LABEL_CHARS, description="exclusion code"),
    **{name: F("number", description=desc) for name, desc in (
        ("a", "belief a"), ("b", "belief b"), ("mean", "belief mean"),
        ("busyness", "busyness used"), ("ask_load", "ask load f"), ("distance_m", "metres"),
        ("c", "context factor"), ("p", "predicted help probability"),
        ("interruption_s", "interruption cost, robot-s"), ("advantage_s", "A, robot-s"),
        ("voi_s", "information value, robot-s"), ("future_requests", "N"),
        ("score_s", "Q = A + N VOI - lasting cost, robot-s"))},
    # since the lasting cost entered the score; optional so that older bags still load
    "lasting_cost_s": F("number", required=False,
                        description="what the ask's load takes from later requests, robot-s"),
})

CONSTANT_SOURCES = ("parameter_file", "learned")

SOURCE = F("object", fields={
    "site_constants": F("enum", choices=CONSTANT_SOURCES,
                        description="where the model's site constants came from: the "
                        "parameter values, or site learning (fit/online.py)"),
    "revision": F("integer", low=0, high=1e12,
                  description="the learned revision in force (0: parameter file)"),
})

PARAMETERS = F("object", fields={
    "model": F("any_object", description="core.model.to_plain(SiteModel)"),
    "config": F("any_object", description="core.model.to_plain(DecisionConfig)"),
    "source": F("object", required=False, fields=SOURCE.fields,
                description="where the site constants in `model` came from"),
})

DECISION = F("object", fields={
    **_header("decision"),
    "robot_id": F("string", max_len=MAX_ID_CHARS, description="robot that decided"),
    "request_id": _id("help need id"),
    "stamp_s": _time("decision time now_s, seconds"),
    "action": F("enum", choices=ACTIONS, description="ask or continue"),
    "person_id": _id("person to ask (null when continuing)", nullable=True),
    "why": F("string", max_len=MAX_LABEL_CHARS, description="reason code of the action"),
    "policy": F("string", max_len=MAX_LABEL_CHARS, description="policy name"),
    "params_hash": F("string", max_len=64, description="hash of the parameters in force"),
    "continue_cost_s": F("number", low=0.0, high=1e12, description="C_r used, robot-s"),
    "help_time_s": F("number", low=0.0, high=1e9, description="t_help used, seconds"),
    "need": NEED,
    "robot_ask_times_s": F("array", items=_time("ask time"), max_len=MAX_TIMES,
                           description="the robot's asks within the hour before stamp_s"),
    "candidates": F("array", items=CANDIDATE, max_len=MAX_CANDIDATES,
                    description="full core inputs per candidate"),
    "rationale": F("array", items=RATIONALE_ROW, max_len=MAX_CANDIDATES,
                   description="Decision.rationale() rows"),
    "parameters": F("object", required=False, fields=PARAMETERS.fields,
                    description="parameter values in force"),
})

SPECS: dict[str, F] = {"people": PEOPLE, "task_status": TASK_STATUS, "outcome": OUTCOME,
                       "decision": DECISION}

# The size of one candidate in a decision document, bounded from the specs above: every
# number at the longest text a float has, every other text at its longest, and the person id,
# activity and ask times of the candidate itself (json.dumps writes non-ASCII as \u escapes,
# up to 12 bytes a character). The help session keeps each decision within MAX_DOCUMENT_BYTES
# with it (session.py, _within_one_document).
_LONGEST_NUMBER = -2.2250738585072014e-308      # repr: 24 characters, the most a float takes


def _fixed_bytes(spec: F, own: tuple[Any, ...]) -> int:
    doc: dict[str, Any] = {}
    for name, f in spec.fields.items():
        if name in own:
            doc[name] = ""                      # counted from the candidate itself
        elif f.kind in ("number", "integer"):
            doc[name] = _LONGEST_NUMBER         # longer than null, and than any integer here
        elif f.kind == "string":
            doc[name] = "x" * f.max_len         # an exclusion code: ASCII
        elif f.kind == "boolean":
            doc[name] = False
        else:
            doc[name] = []
    return len(json.dumps(doc, separators=(",", ":")))


CANDIDATE_FIXED_BYTES = (_fixed_bytes(CANDIDATE, ("person_id", "activity"))
                         + _fixed_bytes(RATIONALE_ROW, ("person_id",)) + 2)  # +2: the commas
ASK_TIME_BYTES = len(repr(_LONGEST_NUMBER)) + 1


def candidate_bytes_bound(candidate: Candidate, quick: bool = False) -> int:
    """Return at most how many bytes `candidate` adds to a decision document.

    At most how many bytes `candidate` adds to a decision document (its entry in `candidates` and
    its row in `rationale`, as `fast_text` writes them). `quick`: a looser bound from lengths alone
    (12 bytes a character: two escapes of six), without writing the texts.
    """
    if quick:
        text, activity = 12 * len(candidate.person_id), 12 * len(candidate.activity)
    else:
        text = len(json.dumps(candidate.person_id)) - 2
        activity = len(json.dumps(candidate.activity)) - 2
    return (CANDIDATE_FIXED_BYTES + 2 * text + activity
            + ASK_TIME_BYTES * len(candidate.ask_times_s))


def candidates_bytes_bound_quick(candidates: Iterable[Candidate]) -> int:
    """Return the sum of `candidate_bytes_bound(c, quick=True)` over `candidates`, in one pass."""
    return sum(CANDIDATE_FIXED_BYTES + 24 * len(c.person_id) + 12 * len(c.activity)
               + ASK_TIME_BYTES * len(c.ask_times_s) for c in candidates)


def _is_number(v: Any, low: float, high: float) -> bool:
    return (type(v) is float or type(v) is int) and low <= v <= high   # NaN fails both


_PERSON_FIELDS = frozenset(PERSON.fields)


def _plain_person(p: Any) -> bool:
    """Return True for a person entry that `_check(PERSON, ...)` accepts.

    Settled in one pass (a people document at 30 Hz holds up to MAX_PEOPLE of them). False means
    "not settled here", never "invalid": the generic check then runs and names the field.
    """
    if type(p) is not dict or not _PERSON_FIELDS.issuperset(p):
        return False
    pid = p.get("id")
    if type(pid) is not str or not 1 <= len(pid) <= MAX_ID_CHARS or not pid.isascii():
        return False
    if not _is_number(p.get("distance_m"), 0.0, 1e6):
        return False
    x = p.get("busyness")
    if x is not None and not _is_number(x, 0.0, 1.0):
        return False
    if "activity" in p:                 # not nullable: null goes to the generic check
        act = p["activity"]
        if type(act) is not str or len(act) > MAX_LABEL_CHARS or not act.isascii():
            return False
    if "position" in p:
        pos = p["position"]
        return (type(pos) is list and len(pos) == 3
                and all(_is_number(v, -BIG, BIG) for v in pos))
    return True


# item specs with a one-pass check of their usual form (see _plain_person)
_PLAIN_ITEM = {id(PERSON): _plain_person}


def _check(spec: F, value: Any, path: str) -> None:
    if value is None:
        if spec.nullable:
            return
        raise WireError(f"{path}: must not be null")
    k = spec.kind
    if k == "string":
        if not isinstance(value, str):
            raise WireError(f"{path}: expected a string, got {describe(value)}")
        if not spec.min_len <= len(value) <= spec.max_len:
            raise WireError(f"{path}: length {len(value)} is outside the allowed "
                            f"[{spec.min_len}, {spec.max_len}] characters")
        at = lone_surrogate_at(value)
        if at is not None:
            raise WireError(f"{path}: not valid Unicode text (lone surrogate at "
                            f"character {at})")
    elif k in ("number", "integer"):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise WireError(f"{path}: expected a number, got {describe(value)}")
        try:
            v = float(value)
        except OverflowError:   # an integer literal beyond any float, e.g. 1 then 400 zeros
            v = math.inf if value > 0 else -math.inf
        if k == "integer" and math.isfinite(v) and not v.is_integer():
            raise WireError(f"{path}: expected a whole number, got {short_number(value)}")
        lo_ok = v > spec.low if spec.low_open else v >= spec.low
        if not math.isfinite(v) or not lo_ok or v > spec.high:
            lb = "(" if spec.low_open else "["
            raise WireError(f"{path}: {short_number(value)} is outside the allowed range "
                            f"{lb}{spec.low:g}, {spec.high:g}]")   # the real limits, e.g. 1e+15
    elif k == "boolean":
        if not isinstance(value, bool):
            raise WireError(f"{path}: expected true or false, got {describe(value)}")
    elif k == "enum":
        if isinstance(value, bool) or value not in spec.choices:
            allowed = ", ".join(str(c) for c in spec.choices)
            raise WireError(f"{path}: {quoted(value)} is not one of {allowed}")
    elif k == "array":
        if not isinstance(value, list):
            raise WireError(f"{path}: expected an array, got {describe(value)}")
        if not spec.min_len <= len(value) <= spec.max_len:
            raise WireError(f"{path}: {len(value)} items is outside the allowed "
                            f"[{spec.min_len}, {spec.max_len}]")
        items = spec.items
        assert items is not None, spec   # every array spec names its items
        plain = _PLAIN_ITEM.get(id(items))
        for i, item in enumerate(value):
            if plain is None or not plain(item):
                _check(items, item, f"{path}[{i}]")
    elif k == "any_object":
        if not isinstance(value, dict):
            raise WireError(f"{path}: expected an object, got {describe(value)}")
    elif k == "object":
        if not isinstance(value, dict):
            raise WireError(f"{path}: expected an object, got {describe(value)}")
        unknown = [name for name in value if name not in spec.fields]
        if unknown:   # the first by name; a caller's dict may hold other keys: those last
            first = min(unknown, key=lambda name: (not isinstance(name, str),
                                                   name if isinstance(name, str) else ""))
            raise WireError(f"{path or 'document'}: unknown field {quoted(first)} "
                            f"(allowed: {', '.join(spec.fields)})")
        for name, sub in spec.fields.items():
            sub_path = f"{path}.{name}" if path else name
            if name not in value:
                if sub.required:
                    raise WireError(f"{sub_path}: required field is missing")
                continue
            _check(sub, value[name], sub_path)


def validate(name: str, document: Any) -> dict[str, Any]:
    """Check a decoded document against its spec; returns it or raises WireError."""
    spec = SPECS.get(name)
    if spec is None:
        raise WireError(f"doc: unknown document {quoted(name)} (allowed: {', '.join(SPECS)})")
    if not isinstance(document, dict):
        raise WireError(f"{name}: expected a JSON object, got {describe(document)}")
    _check(spec, document, "")
    if name == "task_status" and document["state"] == "open" and "kind" not in document:
        raise WireError("kind: required when state is open")
    if name == "decision":
        if (document["action"] == "ask") != (document["person_id"] is not None):
            raise WireError("person_id: must be set exactly when action is ask")
    return document


def lone_surrogate_at(text: str) -> Optional[int]:
    r"""Where a lone surrogate (JSON "\ud800") sits in `text`, or None.

    Such text cannot be hashed, stored in SQLite or published, so every input refuses it by field.
    """
    if text.isascii():
        return None
    try:
        text.encode("utf-8")
    except UnicodeEncodeError as exc:
        return exc.start
    return None


def _refuse_constant(text: str) -> NoReturn:
    raise WireError(f"document: {text} is not allowed (numbers must be finite)")


def _refuse_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    """JSON objects with a repeated name are ambiguous (parsers keep the first or the last)."""
    obj = dict(pairs)
    if len(obj) != len(pairs):
        seen: set[str] = set()
        for name, _ in pairs:
            if name in seen:
                raise WireError(f"document: duplicate field {quoted(name)} in one JSON object")
            seen.add(name)
    return obj


def decode(name: str, text: Any) -> dict[str, Any]:
    """Parse and validate the JSON text of document `name`."""
    if isinstance(text, (bytes, bytearray)):
        try:
            text = bytes(text).decode("utf-8")
        except UnicodeDecodeError as exc:
            raise WireError(f"document: not UTF-8 ({exc.reason})") from None
    if not isinstance(text, str):
        raise WireError(f"document: expected text, got {describe(text)}")
    if len(text) > MAX_DOCUMENT_BYTES or len(text.encode("utf-8", "replace")) > MAX_DOCUMENT_BYTES:
        raise WireError(f"document: larger than the allowed {MAX_DOCUMENT_BYTES} bytes")
    return validate(name, parse_json(text))


def parse_json(text: str) -> Any:
    """JSON text to values, strictly.

    NaN/Infinity and repeated names in one object refused (WireError, "document: ..."); also used
    for the signed fleet documents.
    """
    if orjson is not None and len(text) <= FAST_PARSE_MAX_CHARS:
        value = _fast_parse(text)
        if value is not _UNSETTLED:
            return value
    try:
        return json.loads(text, parse_constant=_refuse_constant,
                          object_pairs_hook=_refuse_duplicates)
    except WireError:
        raise
    except RecursionError:   # nested deeper than the parser goes from here: name the field
        where = deep_nesting_at(text, DEEP_NESTING_LEVELS)
        if where is None:
            raise WireError("document: not valid JSON (nested too deep to read)") from None
        path, depth = where
        raise WireError(f"{path or 'document'}: nested {depth} or more levels deep, too "
                        "deep to read as JSON") from None
    except ValueError as exc:
        raise WireError(f"document: not valid JSON ({str(exc)[:80]})") from None


DEEP_NESTING_LEVELS = 64      # deeper than any document here (a decision: 4 levels)
# Texts up to this long (task_status and outcome documents: the decision's latency path) are
# read by orjson first. Such a text nests at most 500 levels, where the standard library's
# parser is still far from its recursion limit, so both parsers read the same texts.
FAST_PARSE_MAX_CHARS = 1000
_UNSETTLED = object()


def _fast_parse(text: str) -> Any:
    """Return orjson's reading of `text` when it is the one `parse_json` gives; else _UNSETTLED.

    orjson keeps the last of repeated names and reads some texts the standard library refuses
    or reads otherwise, so its value counts only when writing it back gives `text` exactly:
    then no name was repeated (one would be missing) and every number and string reads the
    same in both. Anything else (refused, other spacing or escapes, "1E5") takes the strict
    path, which gives every error message.
    """
    assert orjson is not None
    try:
        value = orjson.loads(text)
        same = orjson.dumps(value) == text.encode("utf-8")
    except (orjson.JSONDecodeError, orjson.JSONEncodeError, UnicodeEncodeError):
        return _UNSETTLED
    return value if same else _UNSETTLED


_JSON_TOKEN = re.compile(r'"(?:[^"\\]|\\.)*"|[\[\]{},:]')


def deep_nesting_at(text: str, levels: int) -> Optional[tuple[str, int]]:
    """(path, levels) of the first value nested `levels` deep in JSON `text`, or None.

    Reads the text without recursion (the json module recurses, and gives up without saying
    where), so a refusal can name the field that holds the nesting: `time_s[0][0][0]...`.
    """
    stack: list[list[Any]] = []              # per open container: [is_object, key or index]
    expect_key = False
    for m in _JSON_TOKEN.finditer(text):
        tok = m.group()
        if tok in ("{", "["):
            stack.append([tok == "{", None if tok == "{" else 0])
            expect_key = tok == "{"
            if len(stack) >= levels:
                return _nesting_path(stack), len(stack)
        elif tok in ("}", "]"):
            if stack:
                stack.pop()
            expect_key = False
        elif tok == ",":
            if stack and not stack[-1][0]:
                stack[-1][1] += 1
            expect_key = bool(stack) and stack[-1][0]
        elif tok == ":":
            expect_key = False
        elif expect_key and stack:      # a name in an object
            try:
                stack[-1][1] = json.loads(tok)
            except ValueError:
                stack[-1][1] = "?"
            expect_key = False
    return None


def _nesting_path(stack: list[list[Any]], parts_shown: int = 6) -> str:
    """Return the path of the innermost container's place, as wire writes paths.

    Cut short after `parts_shown` parts (the field that holds the nesting comes first).
    """
    parts: list[str] = []
    for is_object, at in stack[:parts_shown]:
        if is_object:
            name = at if isinstance(at, str) else "?"
            parts.append(("." if parts else "") + short_name(name)[:40])
        else:
            parts.append(f"[{at}]")
    return "".join(parts) + ("..." if len(stack) > parts_shown else "")


def encode(name: str, document: Mapping[str, Any]) -> str:
    """Validate and serialise a document (compact, NaN refused)."""
    doc = validate(name, dict(document))
    try:
        text = json.dumps(doc, separators=(",", ":"), allow_nan=False)
    except ValueError as exc:
        raise WireError(f"document: {exc}") from None
    if len(text.encode("utf-8")) > MAX_DOCUMENT_BYTES:
        raise WireError(f"document: larger than the allowed {MAX_DOCUMENT_BYTES} bytes")
    return text


# ----------------------------------------------------------------------------------------
# One-call builders for integrators (each returns validated JSON text).

def people_document(people: Iterable[Mapping[str, Any]], stamp_s: float,
                    frame_id: str = "") -> str:
    """people: mappings with id, distance_m and optional busyness, activity, position."""
    doc = {"doc": "people", "version": VERSION, "stamp_s": float(stamp_s),
           "people": [dict(p) for p in people]}
    if frame_id:
        doc["frame_id"] = frame_id
    return encode("people", doc)


def task_status_document(request_id: str, state: str = "open", kind: str = "",
                         urgency: float = 0.0, continue_cost_s: Optional[float] = None,
                         help_time_s: Optional[float] = None,
                         stamp_s: Optional[float] = None) -> str:
    doc: dict[str, Any] = {"doc": "task_status", "version": VERSION,
                           "request_id": request_id, "state": state}
    if kind:
        doc["kind"] = kind
    if state == "open":
        doc["urgency"] = float(urgency)
    if continue_cost_s is not None:
        doc["continue_cost_s"] = float(continue_cost_s)
    if help_time_s is not None:
        doc["help_time_s"] = float(help_time_s)
    if stamp_s is not None:
        doc["stamp_s"] = float(stamp_s)
    return encode("task_status", doc)


def outcome_document(request_id: str, person_id: str, result: str,
                     stamp_s: Optional[float] = None) -> str:
    doc: dict[str, Any] = {"doc": "outcome", "version": VERSION, "request_id": request_id,
                           "person_id": person_id, "result": str(getattr(result, "value", result))}
    if stamp_s is not None:
        doc["stamp_s"] = float(stamp_s)
    return encode("outcome", doc)


# ----------------------------------------------------------------------------------------
# Decoded inputs as plain values for the node.

@dataclass(frozen=True)
class SeenPerson:
    person_id: str
    distance_m: float
    busyness: Optional[float]
    activity: str
    position: Optional[tuple[float, float, float]]


def people_from(doc: Mapping[str, Any]) -> list[SeenPerson]:
    out = []
    for p in doc["people"]:
        pos = p.get("position")
        out.append(SeenPerson(p["id"], float(p["distance_m"]),
                              None if p.get("busyness") is None else float(p["busyness"]),
                              p.get("activity", ""),
                              (float(pos[0]), float(pos[1]), float(pos[2])) if pos else None))
    return out


def help_need_from(doc: Mapping[str, Any], opened_at_s: float) -> HelpNeed:
    """Return a HelpNeed from an `open` task_status document (opened at the node's clock time)."""
    return HelpNeed(request_id=doc["request_id"], kind=doc["kind"], opened_at_s=opened_at_s,
                    urgency=float(doc.get("urgency", 0.0)),
                    continue_cost_s=doc.get("continue_cost_s"), help_time_s=doc.get("help_time_s"))


# ----------------------------------------------------------------------------------------
# The decision document and its exact replay.

def _need_plain(need: HelpNeed) -> dict[str, Any]:
    return {"request_id": need.request_id, "kind": need.kind, "urgency": float(need.urgency),
            "continue_cost_s": need.continue_cost_s, "help_time_s": need.help_time_s,
            "opened_at_s": float(need.opened_at_s)}


def _candidate_plain(c: Candidate) -> dict[str, Any]:
    times = c.ask_times_s
    return {"person_id": c.person_id, "distance_m": float(c.distance_m),
            "observed_at_s": float(c.observed_at_s), "a": float(c.belief.a),
            "b": float(c.belief.b), "busyness": None if c.busyness is None else float(c.busyness),
            "activity": c.activity,
            "ask_times_s": [float(t) for t in times] if times else [],
            "candidate_count": int(c.candidate_count),
            "first_seen_s": None if c.first_seen_s is None else float(c.first_seen_s),
            "opted_out": bool(c.opted_out)}


def decision_to_document(decision: Decision, robot_ask_times_s: Sequence[float],
                         model: Optional[SiteModel] = None,
                         config: Optional[DecisionConfig] = None, robot_id: str = "",
                         check: bool = True,
                         source: Optional[tuple[str, int]] = None) -> dict[str, Any]:
    """Return the decision as a plain document; `encode("decision", doc)` makes the text.

    `check=False` skips validation (the node: every value comes from validated core values,
    and validating costs more than deciding; the tests check its output documents).
    `source`: (site_constants, revision) of the model, e.g. ("learned", 3).

    Only the robot's asks within the hour before the decision are kept: those are all the
    robot-hourly cap looks at, so the replay reproduces the decision exactly.
    """
    ev = decision.evaluation
    now = float(ev.now_s)
    doc: dict[str, Any] = {
        "doc": "decision", "version": VERSION, "robot_id": robot_id,
        "request_id": ev.need.request_id, "stamp_s": now, "action": decision.action,
        "person_id": decision.person_id, "why": decision.why, "policy": decision.policy,
        "params_hash": ev.params_hash, "continue_cost_s": float(ev.continue_cost_s),
        "help_time_s": float(ev.help_time_s), "need": _need_plain(ev.need),
        "robot_ask_times_s": [float(t) for t in robot_ask_times_s if now - t < HOUR_S],
        "candidates": [_candidate_plain(c) for c in ev.candidates],
        "rationale": decision.rationale(),
    }
    if model is not None and config is not None:
        doc["parameters"] = _parameters_plain(model, config, source)
    return validate("decision", doc) if check else doc


@functools.lru_cache(maxsize=16)
def _parameters_plain_cached(model: SiteModel, config: DecisionConfig,
                             source: Optional[tuple[str, int]] = None) -> str:
    plain: dict[str, Any] = {"model": to_plain(model), "config": to_plain(config)}
    if source is not None:
        plain["source"] = {"site_constants": source[0], "revision": int(source[1])}
    return json.dumps(plain, separators=(",", ":"), allow_nan=False)


def _parameters_plain(model: SiteModel, config: DecisionConfig,
                      source: Optional[tuple[str, int]] = None) -> dict[str, Any]:
    plain: dict[str, Any] = json.loads(_parameters_plain_cached(model, config, source))
    return plain


def compact_json(document: Any, finite: bool = False) -> str:
    r"""Compact JSON text of a plain document; NaN and infinity are refused (ValueError).

    `finite=True` says the caller has checked every float is finite, which lets orjson (when
    installed) write it: orjson would write NaN as null instead of refusing it. Its text is
    never longer than the standard library's (UTF-8 rather than \u escapes, shortest
    float forms), so the byte bounds above hold for both.
    """
    if finite and orjson is not None:
        text: str = orjson.dumps(document).decode("utf-8")
        return text
    return json.dumps(document, separators=(",", ":"), allow_nan=False)


def evaluation_is_finite(decision: Decision) -> bool:
    """Tell whether every number a decision takes from the evaluation is finite.

    Every number a decision document takes from the evaluation is finite (the inputs were
    range-checked by the core, so these arrays are the only place a NaN could arise).
    """
    ev = decision.evaluation
    arrays = (ev.a, ev.b, ev.mean, ev.busyness, ev.ask_load, ev.c, ev.p, ev.interruption_s,
              ev.advantage_s, ev.voi_s, ev.future_requests, ev.lasting_cost_s, ev.score_s)
    return (math.isfinite(ev.now_s) and math.isfinite(ev.continue_cost_s)
            and math.isfinite(ev.help_time_s)
            and bool(np.isfinite(np.concatenate(arrays)).all()))


def fast_text(document: Mapping[str, Any], model: Optional[SiteModel] = None,
              config: Optional[DecisionConfig] = None,
              source: Optional[tuple[str, int]] = None, finite: bool = False) -> str:
    """Serialise a document built here without validating it again (NaN still refused).

    With model and config, their `parameters` object (and the constants' `source`) is spliced
    in from a cache: it is the same text at every decision until a parameter or the learned
    revision changes. `finite`: as in `compact_json`.
    """
    text = compact_json(document, finite)
    if model is None or config is None:
        return text
    return (text[:-1] + ',"parameters":' + _parameters_plain_cached(model, config, source)
            + "}")


def decision_text(decision: Decision, robot_ask_times_s: Sequence[float],
                  model: Optional[SiteModel] = None, config: Optional[DecisionConfig] = None,
                  robot_id: str = "", source: Optional[tuple[str, int]] = None) -> str:
    return encode("decision", decision_to_document(decision, robot_ask_times_s, model, config,
                                                   robot_id, source=source))


def replay_inputs(document: Mapping[str, Any]
                  ) -> tuple[HelpNeed, list[Candidate], float, tuple[float, ...]]:
    """(need, candidates, now_s, robot_ask_times_s) exactly as the decision saw them."""
    if isinstance(document, (str, bytes)):
        document = decode("decision", document)
    else:
        validate("decision", dict(document) if isinstance(document, Mapping) else document)
    n = document["need"]
    need = HelpNeed(request_id=n["request_id"], kind=n["kind"], opened_at_s=n["opened_at_s"],
                    urgency=n["urgency"], continue_cost_s=n["continue_cost_s"],
                    help_time_s=n["help_time_s"])
    cands = [Candidate(person_id=c["person_id"], distance_m=c["distance_m"],
                       observed_at_s=c["observed_at_s"], belief=Belief(c["a"], c["b"]),
                       busyness=c["busyness"], activity=c["activity"],
                       ask_times_s=tuple(c["ask_times_s"]),
                       candidate_count=int(c["candidate_count"]),
                       first_seen_s=c["first_seen_s"], opted_out=c["opted_out"])
             for c in document["candidates"]]
    return need, cands, float(document["stamp_s"]), tuple(document["robot_ask_times_s"])


def recorded_source(document: Mapping[str, Any]) -> tuple[str, int]:
    """(site_constants, revision) of a decision's model.

    Documents from before site learning carry none: their constants came from the parameter file.
    """
    params = document.get("parameters") if isinstance(document, Mapping) else None
    source = params.get("source") if isinstance(params, dict) else None
    if not isinstance(source, dict):
        return "parameter_file", 0
    return str(source.get("site_constants", "parameter_file")), int(source.get("revision", 0))


def recorded_params(document: Mapping[str, Any]) -> tuple[SiteModel, DecisionConfig]:
    """Return the SiteModel and DecisionConfig in force at the decision (from its `parameters`)."""
    params = document.get("parameters") if isinstance(document, Mapping) else None
    if not isinstance(params, dict):
        raise WireError("parameters: absent from this decision document")
    try:
        return from_plain(SiteModel, params["model"]), from_plain(DecisionConfig, params["config"])
    except (KeyError, TypeError, ValueError) as exc:
        raise WireError(f"parameters: {exc}") from None


# ----------------------------------------------------------------------------------------
# JSON Schema (draft 2020-12) generated from the same specs.

def _schema(spec: F) -> dict[str, Any]:
    k = spec.kind
    if k == "string":
        out: dict[str, Any] = {"type": "string", "minLength": spec.min_len,
                               "maxLength": spec.max_len}
    elif k in ("number", "integer"):
        out = {"type": k}
        out["exclusiveMinimum" if spec.low_open else "minimum"] = spec.low
        out["maximum"] = spec.high
    elif k == "boolean":
        out = {"type": "boolean"}
    elif k == "enum":
        out = {"enum": list(spec.choices)}
    elif k == "array":
        assert spec.items is not None, spec
        out = {"type": "array", "items": _schema(spec.items), "maxItems": spec.max_len}
        if spec.min_len:
            out["minItems"] = spec.min_len
    elif k == "any_object":
        out = {"type": "object"}
    else:
        out = {"type": "object", "additionalProperties": False,
               "properties": {n: _schema(s) for n, s in spec.fields.items()},
               "required": [n for n, s in spec.fields.items() if s.required]}
    if spec.nullable:
        if "type" in out:
            out["type"] = [out["type"], "null"]
        else:
            out["enum"] = out["enum"] + [None]
    if spec.description:
        out["description"] = spec.description
    return out


def json_schema(name: str) -> dict[str, Any]:
    schema = _schema(SPECS[name])
    schema = {"$schema": "https://json-schema.org/draft/2020-12/schema",
              "$id": f"helpaware_node/{name}/v{VERSION}", "title": f"helpaware {name} document",
              **schema}
    if name == "task_status":
        schema["if"] = {"properties": {"state": {"const": "open"}}}
        schema["then"] = {"required": ["kind"]}
    if name == "decision":
        schema["if"] = {"properties": {"action": {"const": "ask"}}}
        schema["then"] = {"properties": {"person_id": {"type": "string"}}}
        schema["else"] = {"properties": {"person_id": {"type": "null"}}}
    return schema


def write_schemas(directory: str) -> list[str]:
    import os
    os.makedirs(directory, exist_ok=True)
    paths = []
    for name in SPECS:
        path = os.path.join(directory, f"{name}.json")
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(json_schema(name), fh, indent=2)
            fh.write("\n")
        paths.append(path)
    return paths


if __name__ == "__main__":  # python -m helpaware_node.wire docs/schemas
    import sys
    for p in write_schemas(sys.argv[1] if len(sys.argv) > 1 else "docs/schemas"):
        print(p)

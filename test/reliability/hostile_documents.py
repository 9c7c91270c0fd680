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

"""Hostile documents by class, for every input topic and every fleet kind (issue 14).

Each case is one seed document with one field set to a hostile value of one class:

  deep_nesting      a number (or object) nested 2 to 5 000 levels deep, in any numeric field
  huge_string       65 to 1 000 001 characters, in any text field
  non_ascii         non-ASCII text (digits that are not ASCII, letters, emoji, marks, controls,
                    lone surrogates, NUL), in any text field
  bad_id            ids out of range: event ids beyond SQLite's integer range or with
                    non-ASCII digits, bad robot ids, person keys that are not 64 hex digits,
                    request ids past their bound
  oversized_array   arrays longer (or shorter) than allowed, and an array where a single value
                    belongs

Fleet and privacy documents are signed again with the test's site key after the change (a
peer that holds the key), whenever the signature can cover the value (no lone surrogate,
nesting of at most 16 levels); otherwise the old signature travels with the changed document,
as from a peer without the key.

The expectation of each case comes from the hand table FIELDS below, written from
docs/schemas/*.json (the wire documents) and docs/store.md (the fleet kinds), not from the
code under test: `refused` when the value breaks the field's rule, `maybe` when it may be
valid (free text within its bound; a state reason may still refuse it).

`build(choose, topic)` takes a chooser (hypothesis' draw of sampled_from, or random.choice),
so the same cases drive the hypothesis fuzz at the handlers and seeded runs through the topics.
"""
from __future__ import annotations

from dataclasses import dataclass
import json
import re
import time
from typing import Any, Callable, Sequence

from helpaware_node.signing import CanonicalError, KeyRing, SIGNATURE_FIELDS

UNKNOWN_KEY = "ab" * 32          # a hashed key of nobody the robot knows
OTHER_KEY = "cd" * 32

# field rules: ("number",), ("text", min, max), ("strict", pattern), ("enum", choices),
# ("array", min, max, item rule)
NUM = ("number",)


def text(lo: int, hi: int) -> tuple:
    return ("text", lo, hi)


HEX64 = ("strict", r"[0-9a-f]{64}")
EVENT_ID = ("strict", r"[^/\s]([^/]{0,62}[^/\s])?/(0|[1-9][0-9]{0,18})")


def enum(*choices) -> tuple:
    return ("enum", choices)


PEOPLE_SEED = {"doc": "people", "version": 1, "stamp_s": 100.0, "frame_id": "map",
               "people": [{"id": "visitor-x", "distance_m": 2.0, "busyness": 0.1,
                           "activity": "charting", "position": [1.0, 0.0, 0.0]}]}
TASK_SEED = {"doc": "task_status", "version": 1, "request_id": "hz-open", "state": "open",
             "kind": "door", "urgency": 0.3, "continue_cost_s": 100.0, "help_time_s": 20.0,
             "stamp_s": 100.0}
OUTCOME_SEED = {"doc": "outcome", "version": 1, "request_id": "no-such-ask",
                "person_id": "nurse-a", "result": "declined", "stamp_s": 100.0}
FLEET_OUTCOME_SEED = {"v": 2, "kind": "outcome", "event_id": "peer/1", "person_key": UNKNOWN_KEY,
                      "time_s": 100.0, "result": "declined", "busyness": 0.2, "ask_load": 0.0,
                      "request_kind": "door"}
FLEET_ASK_SEED = {"v": 2, "kind": "ask", "event_id": "peer/2", "person_key": UNKNOWN_KEY,
                  "time_s": 100.0, "request_kind": "door", "request_id": "p-need-1"}
ACT_FIELDS = {"id": text(1, 128), "person_key": HEX64, "from": text(1, 128),
              "request_id": text(0, 128), "issued_s": NUM}
UNSIGNED_SEED = {"action": "opt_out", "person_id": "visitor-p"}

# (seed, field rules by path) per topic; wire paths as wire writes them
FIELDS: dict[str, tuple[dict, dict]] = {
    "people": (PEOPLE_SEED, {
        ("stamp_s",): NUM, ("frame_id",): text(0, 64), ("doc",): enum("people"),
        ("people",): ("array", 0, 500, "person"),
        ("people", 0, "id"): text(1, 128), ("people", 0, "distance_m"): NUM,
        ("people", 0, "busyness"): NUM, ("people", 0, "activity"): text(0, 64),
        ("people", 0, "position"): ("array", 3, 3, "number"),
        ("people", 0, "position", 1): NUM}),
    "task_status": (TASK_SEED, {
        ("request_id",): text(1, 128), ("state",): enum("open", "resolved", "cancelled"),
        ("kind",): text(1, 64), ("urgency",): NUM, ("continue_cost_s",): NUM,
        ("help_time_s",): NUM, ("stamp_s",): NUM, ("doc",): enum("task_status")}),
    "outcome": (OUTCOME_SEED, {
        ("request_id",): text(1, 128), ("person_id",): text(1, 128),
        ("result",): enum("helped", "declined", "no_response", "could_not_ask"),
        ("stamp_s",): NUM}),
    "fleet:outcome": (FLEET_OUTCOME_SEED, {
        ("event_id",): EVENT_ID, ("person_key",): HEX64, ("time_s",): NUM,
        ("result",): enum("helped", "declined", "no_response", "could_not_ask"),
        ("busyness",): NUM, ("ask_load",): NUM, ("request_kind",): text(0, 64),
        ("kind",): enum("outcome"), ("v",): enum(2), ("site",): ("strict", "site"),
        ("sig",): ("strict", "sig")}),
    "fleet:ask": (FLEET_ASK_SEED, {
        ("event_id",): EVENT_ID, ("person_key",): HEX64, ("time_s",): NUM,
        ("request_kind",): text(0, 64), ("request_id",): text(0, 128),
        ("key_id",): ("strict", "key_id")}),
    "fleet:forget": ({"v": 2, "kind": "forget"}, {(k,): v for k, v in ACT_FIELDS.items()}),
    "fleet:opt_out": ({"v": 2, "kind": "opt_out"}, {(k,): v for k, v in ACT_FIELDS.items()}),
    "privacy:forget": ({"v": 2, "kind": "forget"}, {(k,): v for k, v in ACT_FIELDS.items()}),
    "privacy:opt_out": ({"v": 2, "kind": "opt_out"}, {(k,): v for k, v in ACT_FIELDS.items()}),
    "privacy:unsigned": (UNSIGNED_SEED, {
        ("action",): enum("opt_out", "forget"), ("person_id",): text(1, 128)}),
}
TOPICS = tuple(FIELDS)

DEPTHS = (2, 17, 100, 980, 5000)
LENGTHS = (65, 129, 257, 10_000, 99_000, 200_000, 1_000_001)
NON_ASCII = ("\u00b2", "\u0663", "\uff11", "caf\u00e9", "\u540d\u524d", "\U0001F600",
             "e\u0301", "\u202eabc", "\x00", "line\nbreak", "\x7f", "\ud800", "a\udfffb",
             "\u00a0x", "\ufeff")
BAD_EVENT_IDS = ("r1/99999999999999999999", "r1/\u00b2", "r1/\u0663", "r1/9223372036854775807",
                 "r1/18446744073709551616", "r1/01", "r1/-1", "r1/", "/1", "r1", "",
                 " r1/1", "r\n1/1", "x" * 65 + "/1", "a/b/1", "r1/1e3", "r1/\uff11")
BAD_KEYS = ("AB" * 32, "ab" * 31, "ab" * 33, "g" * 64, "\uff10" * 64, "ab" * 31 + "\u00b2\u00b2",
            "")
ARRAY_LENGTHS = (0, 1, 2, 4, 501, 1000, 5000)
CLASSES = ("deep_nesting", "huge_string", "non_ascii", "bad_id", "oversized_array")
ID_FIELDS = ("event_id", "person_key", "request_id", "id", "from")


@dataclass(frozen=True)
class Case:
    topic: str
    cls: str
    path: tuple
    text: str
    expect: str            # "refused" or "maybe"
    field: str             # the word a refusal must name (or a document-level reason)


def act_seed(kind: str) -> dict:
    sender = "console@hostile" if kind.startswith("privacy") else "peer"
    # issued now, so a privacy request is fresh (docs/security.md: 600 s)
    return {"v": 2, "kind": kind.split(":")[1], "id": f"{sender}/0123456789abcdef",
            "person_key": UNKNOWN_KEY, "from": sender, "request_id": f"{sender}/0123456789abcdef",
            "issued_s": float(int(time.time()))}


def seed_of(topic: str) -> dict:
    seed, _ = FIELDS[topic]
    if topic.split(":")[-1] in ("forget", "opt_out"):
        return act_seed(topic)
    return json.loads(json.dumps(seed))


def _set(doc: dict, path: tuple, value: Any) -> dict:
    cur = doc
    for p in path[:-1]:
        cur = cur[p]
    cur[path[-1]] = value
    return doc


HOLE = "__hostile_hole__"


def _with_raw(doc: dict, path: tuple, raw: str, ensure_ascii: bool = True) -> str:
    return json.dumps(_set(doc, path, HOLE), ensure_ascii=ensure_ascii).replace(
        json.dumps(HOLE), raw, 1)


def _rule_ok_text(rule: tuple, value: str) -> bool:
    """Tell whether `value` follows the hand rule of its field (the oracle)."""
    if re.search(r"[\ud800-\udfff]", value):
        return False                      # no lone surrogate is text anywhere
    kind = rule[0]
    if kind == "text":
        return rule[1] <= len(value) <= rule[2]
    if kind == "enum":
        return value in rule[1]
    if kind == "strict":
        if rule[1] in ("site", "sig", "key_id"):
            return False                  # any change of a signature field is refused
        return re.fullmatch(rule[1], value, flags=re.ASCII) is not None and (
            rule is not EVENT_ID or int(value.rpartition("/")[2]) <= 2 ** 63 - 2)
    return False                          # a number or an array field: text is refused


def build(choose: Callable[[Sequence], Any], topic: str, keys: KeyRing) -> Case:
    """One hostile case for `topic`; `choose(seq)` picks one element of a sequence."""
    _, rules = FIELDS[topic]
    cls = choose(CLASSES)
    numeric = [p for p, r in rules.items() if r == NUM]
    texts = [p for p, r in rules.items() if r[0] in ("text", "strict", "enum")]
    ids = [p for p in texts if p[-1] in ID_FIELDS] or texts
    arrays = [p for p, r in rules.items() if r[0] == "array"] or list(rules)
    ensure_ascii = choose((True, False))
    doc = seed_of(topic)
    signed_seed = keys.sign(doc) if topic.startswith(("fleet:", "privacy:")) and \
        topic != "privacy:unsigned" else None
    if signed_seed is not None:       # a signature field is changed on a signed document
        doc = {**doc, **{k: signed_seed[k] for k in SIGNATURE_FIELDS}}
    if cls == "deep_nesting" and numeric:
        path, depth = choose(numeric), choose(DEPTHS)
        raw = ("[" * depth + "1" + "]" * depth if choose((True, False))
               else '{"a":' * depth + "1" + "}" * depth)
        text_ = _with_raw(doc, path, raw)
        return Case(topic, cls, path, _resigned(text_, keys, topic, path), "refused", _word(path))
    if cls in ("deep_nesting", "huge_string"):
        path, n = choose(texts), choose(LENGTHS)
        value = choose(("x", "\u540d", "9")) * n
        expect = "maybe" if _rule_ok_text(rules[path], value) else "refused"
        text_ = json.dumps(_set(doc, path, value), ensure_ascii=ensure_ascii)
        return Case(topic, "huge_string", path, _resigned(text_, keys, topic, path), expect,
                    _word(path))
    if cls == "non_ascii":
        path = choose(texts)
        value = "".join(choose(NON_ASCII) for _ in range(choose((1, 2, 5))))
        if choose((True, False)):
            value = f"{doc_value(doc, path)}{value}"
        expect = "maybe" if _rule_ok_text(rules[path], value) else "refused"
        text_ = json.dumps(_set(doc, path, value), ensure_ascii=ensure_ascii)
        return Case(topic, cls, path, _resigned(text_, keys, topic, path), expect, _word(path))
    if cls == "bad_id":
        path = choose(ids)
        name = path[-1]
        if name == "event_id":
            value = choose(BAD_EVENT_IDS)
        elif name == "person_key":
            value = choose(BAD_KEYS)
        else:
            value = choose(("r" * 129, "r" * 1000, "\ud800", "r" * 129 + "\u00b2"))
        expect = "maybe" if _rule_ok_text(rules[path], value) else "refused"
        text_ = json.dumps(_set(doc, path, value), ensure_ascii=ensure_ascii)
        return Case(topic, cls, path, _resigned(text_, keys, topic, path), expect, _word(path))
    path, n = choose(arrays), choose(ARRAY_LENGTHS)
    rule = rules[path]
    if rule[0] == "array":
        item = (dict(PEOPLE_SEED["people"][0]) if rule[3] == "person" else 0.5)
        value = [dict(item, id=f"crowd-{i}") if isinstance(item, dict) else item
                 for i in range(n)]
        expect = "maybe" if rule[1] <= n <= rule[2] else "refused"
    else:
        value = [1.0] * n                 # an array where one value belongs
        expect = "refused"
    text_ = json.dumps(_set(doc, path, value))
    return Case(topic, "oversized_array", path, _resigned(text_, keys, topic, path), expect,
                _word(path))


def doc_value(doc: dict, path: tuple):
    cur = doc
    for p in path:
        cur = cur[p]
    return cur


def _word(path: tuple) -> str:
    words = [p for p in path if isinstance(p, str)]
    return words[-1]


def _resigned(text_: str, keys: KeyRing, topic: str, path: tuple) -> str:
    """Return the changed text signed again, or with the signature it had.

    Signed again with the site key when the topic's documents are signed and the canonical encoding
    can hold the value; else the changed text with the signature it had (the seed's, as a peer
    without the key would send it). A changed signature field is sent as it is.
    """
    if not topic.startswith(("fleet:", "privacy:")) or topic == "privacy:unsigned":
        return text_
    if path[-1] in SIGNATURE_FIELDS:
        return text_
    try:
        return json.dumps(keys.sign(json.loads(text_)), ensure_ascii=False)
    except (ValueError, RecursionError, CanonicalError, UnicodeEncodeError):
        return text_


def refusal_names(case: Case, reason: str) -> bool:
    """Tell whether the reason names the case's field.

    Or say why the whole document was refused before any field (too long for the topic, too deep to
    parse)?
    """
    if re.search(r"longer than|larger than|not valid JSON", reason):
        return True
    if case.topic in ("people", "task_status", "outcome"):
        head = reason.split(":", 1)[0]
        wanted = ""
        for p in case.path:
            wanted += f"[{p}]" if isinstance(p, int) else (f".{p}" if wanted else p)
        return head.startswith(wanted) or (case.path[-1] == "doc" and head == "doc")
    return re.search(rf"(?<![a-z_]){re.escape(case.field)}(?![a-z_])", reason) is not None


def names_some_field(topic: str, reason: str) -> bool:
    """Tell whether a refusal for the robot's state still names a field.

    For a document that may be valid and was refused for the robot's state (an outcome for a
    request nobody asked about): the reason still starts with, or holds, a field of its topic.
    """
    names = {p for path in FIELDS[topic][1] for p in path if isinstance(p, str)}
    names |= {"document", "v", "kind", "sig", "site", "key_id", "person_id", "person_key"}
    if topic in ("people", "task_status", "outcome"):
        head = re.sub(r"\[\d+\]", "", reason.split(":", 1)[0])
        return all(part in names for part in head.split("."))
    return any(re.search(rf"(?<![a-z_]){re.escape(n)}(?![a-z_])", reason) for n in names)

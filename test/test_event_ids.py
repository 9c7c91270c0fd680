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

"""What may enter a store (store/ids.py).

Event ids, robot ids, bounded text, and which failed writes are the store's (kept) rather than one
event's (dropped).

Outside sources: Python's own sqlite3 module for SQLite's integer range (it refuses to bind an
integer past 2**63 - 1), Python's str.isdigit / int for the digits that are not ASCII, and real
SQLite errors (a file capped with max_page_count, a read-only connection) for the store's
conditions.
"""
import sqlite3

from helpaware_node.core import Result
from helpaware_node.core.model import CoreInputError
from helpaware_node.store import MemoryStore, SqliteStore, StoredEvent
from helpaware_node.store.base import AskEvent
from helpaware_node.store.ids import (
    check_ask,
    check_event,
    check_event_id,
    check_robot_id,
    MAX_EVENT_ID_CHARS,
    MAX_ROBOT_ID_CHARS,
    MAX_SEQUENCE,
    refused_by_store,
)
from helpaware_node.wire import MAX_ID_CHARS, MAX_LABEL_CHARS
from hypothesis import given, strategies as st
import pytest

KEY = "ab" * 32


def event(event_id, kind="door"):
    return StoredEvent(event_id, KEY, 10.0, Result.DECLINED, 0.2, 0.0, kind)


def test_the_sequence_limit_is_sqlites_integer_range():
    conn = sqlite3.connect(":memory:")
    # the largest integer SQLite keeps, and the store notes sequence + 1 for its own robot
    assert conn.execute("SELECT ?", (MAX_SEQUENCE + 1,)).fetchone()[0] == 2 ** 63 - 1
    with pytest.raises(OverflowError):
        conn.execute("SELECT ?", (MAX_SEQUENCE + 2,))
    assert check_event_id(f"r1/{MAX_SEQUENCE}") == ("r1", MAX_SEQUENCE)
    with pytest.raises(CoreInputError, match=r"^event_id: 'r1/9223372036854775807': the sequence"):
        check_event_id(f"r1/{MAX_SEQUENCE + 1}")


@pytest.mark.parametrize("bad", ["r1/99999999999999999999", "r1/\u00b2", "r1/\u0663",
                                 "r1/\uff11", "r1/01", "r1/-1", "r1/+1", "r1/1.0", "r1/ 1",
                                 "r1/", "/7", "r1", "", " r1/1", "r\n1/1", "r\ud800/1",
                                 "x" * (MAX_ROBOT_ID_CHARS + 1) + "/1", "r1/" + "1" * 5000])
def test_event_ids_the_issue_found_and_their_kin_are_refused_by_name(bad):
    # '²' and '٣' are digits to str.isdigit, but int() of the first fails: the old check
    # passed them on to int(); only ASCII digits are a sequence here
    with pytest.raises(CoreInputError, match=r"^event_id: "):
        check_event_id(bad)
    with pytest.raises(CoreInputError, match=r"^event_id: "):
        check_event(event(bad))


def test_non_ascii_digits_are_what_python_calls_digits():
    assert "\u00b2".isdigit() and "\u0663".isdigit()
    with pytest.raises(ValueError):
        int("\u00b2")
    assert int("\u0663") == 3          # int() takes Arabic-Indic digits: '٣' would alias '3'


@given(st.text(max_size=MAX_ROBOT_ID_CHARS + 2), st.integers(-5, 2 ** 64))
def test_an_event_id_is_taken_exactly_when_its_parts_follow_the_rules(robot, seq):
    text = f"{robot}/{seq}"
    robot_ok = (0 < len(robot) <= MAX_ROBOT_ID_CHARS and "/" not in robot
                and robot.isprintable() and robot == robot.strip())
    seq_ok = 0 <= seq <= 2 ** 63 - 2
    if robot_ok and seq_ok:
        assert check_event_id(text) == (robot, seq)
        assert len(text) <= MAX_EVENT_ID_CHARS
    else:
        with pytest.raises(CoreInputError, match=r"^event_id: "):
            check_event_id(text)


def test_robot_ids_share_the_rule_of_store_and_parameters():
    for good in ("r1", "ward-3", "lab.robot_2", "x" * MAX_ROBOT_ID_CHARS, "robot A"):
        assert check_robot_id(good) == good
        MemoryStore(robot_id=good)
    for bad in ("", "a/b", "x" * (MAX_ROBOT_ID_CHARS + 1), "tab\there", " lead", "\ud800"):
        with pytest.raises(CoreInputError, match=r"^robot_id: "):
            check_robot_id(bad)
        with pytest.raises(CoreInputError, match=r"^robot_id: "):
            MemoryStore(robot_id=bad)


def test_kinds_and_request_ids_are_bounded_like_the_robots_own_inputs():
    check_event(event("r1/1", "k" * MAX_LABEL_CHARS))
    with pytest.raises(CoreInputError, match=r"^request_kind: 1200000 characters, at most 64"):
        check_event(event("r1/1", "k" * 1_200_000))
    with pytest.raises(CoreInputError, match=r"^request_kind: not valid Unicode"):
        check_event(event("r1/1", "door\ud800"))
    check_ask(AskEvent("r1/2", KEY, 1.0, "door", "n" * MAX_ID_CHARS))
    with pytest.raises(CoreInputError, match=r"^request_id: 129 characters, at most 128"):
        check_ask(AskEvent("r1/2", KEY, 1.0, "door", "n" * (MAX_ID_CHARS + 1)))
    with pytest.raises(CoreInputError, match=r"^request_kind: 65 characters"):
        check_ask(AskEvent("r1/2", KEY, 1.0, "k" * (MAX_LABEL_CHARS + 1), "n"))


def test_both_stores_refuse_what_the_fleet_refuses(tmp_path):
    sq = SqliteStore(tmp_path / "s.sqlite3", "r1", b"k" * 32)
    mem = MemoryStore(robot_id="r1")
    try:
        for store in (sq, mem):
            with pytest.raises(CoreInputError, match="^event_id"):
                store.append(event("r1/99999999999999999999"))
            with pytest.raises(CoreInputError, match="^event_id"):
                store.append_asks([AskEvent("r1/\u00b2", KEY, 1.0, "door", "n")])
            assert store.append(event(f"r1/{MAX_SEQUENCE}"))
        assert sq.next_event_id() == f"r1/{MAX_SEQUENCE + 1}"   # noted, within SQLite's range
    finally:
        sq.close()


def test_which_failed_writes_are_the_stores(tmp_path):
    path = tmp_path / "full.sqlite3"
    store = SqliteStore(path, "r1", b"k" * 32)
    store.close()
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA max_page_count = " + str(conn.execute("PRAGMA page_count").fetchone()[0]))
    with pytest.raises(sqlite3.OperationalError) as full:
        for i in range(10_000):
            conn.execute("INSERT INTO meta VALUES (?, ?)", (f"filler{i}", "x" * 4000))
    conn.close()
    ro = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    with pytest.raises(sqlite3.OperationalError) as readonly:
        ro.execute("INSERT INTO meta VALUES ('a', 'b')")
    ro.close()
    with pytest.raises(OverflowError) as too_big:
        sqlite3.connect(":memory:").execute("SELECT ?", (2 ** 64,))
    with pytest.raises(sqlite3.IntegrityError) as duplicate:
        c = sqlite3.connect(":memory:")
        c.execute("CREATE TABLE t (k PRIMARY KEY)")
        c.execute("INSERT INTO t VALUES (1)")
        c.execute("INSERT INTO t VALUES (1)")
    assert "full" in str(full.value) and "readonly" in str(readonly.value)
    assert refused_by_store(full.value) and refused_by_store(readonly.value)
    assert refused_by_store(OSError("disk I/O error"))
    assert not refused_by_store(too_big.value) and not refused_by_store(duplicate.value)
    assert not refused_by_store(CoreInputError("event_id: bad"))
    assert not refused_by_store(UnicodeEncodeError("utf-8", "\ud800", 0, 1, "surrogate"))

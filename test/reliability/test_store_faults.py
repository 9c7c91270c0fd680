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

"""The node's store refusing writes (disk full, read-only) or reads (I/O error).

What must hold (docs/RELIABILITY.md): a clear error in the log and /diagnostics, the belief
unchanged, no corruption of the file, the refused outcome kept and saved once the store
accepts writes again, and no ask while an outcome is unsaved: the node never acts on a belief
it could not save.

Faults are real SQLite errors on the node's own connection: `PRAGMA max_page_count` at the
current size gives SQLITE_FULL ("database or disk is full"), the same error a full disk gives;
`PRAGMA query_only` gives "attempt to write a readonly database". The tests run as root, so a
read-only file mode would not stop the writer; these pragmas do.
"""
import sqlite3

from diagnostic_msgs.msg import DiagnosticStatus
from helpaware_node.core.belief import Belief
from helpaware_node.core.person import Result
from helpaware_node.store import SqliteStore, StoredEvent
from helpaware_node.store.keys import load_site_key
from node_harness import Rig

NURSE = {"id": "nurse-a", "distance_m": 1.0, "busyness": 0.0}


def _fill_until_full(store: SqliteStore) -> int:
    """Cap the file at its current size, then write filler events until SQLite says full."""
    conn = store._conn        # fault injection on the node's own connection
    pages = conn.execute("PRAGMA page_count").fetchone()[0]
    conn.execute(f"PRAGMA max_page_count = {pages + 1}")
    filler = store.key_for("filler-person")
    for i in range(10_000):
        try:
            store.append(StoredEvent(f"filler/{i}", filler, float(i), Result.DECLINED, 0.5, 0.0))
        except sqlite3.OperationalError as exc:
            assert "full" in str(exc)
            return i
    raise AssertionError("the store never filled up")


def _unlimit(store: SqliteStore) -> None:
    store._conn.execute("PRAGMA max_page_count = 1073741823")


def _last_status(rig):
    for arr in reversed(rig.diagnostics):
        for s in arr.status:
            if s.name.endswith(": decision"):
                return s.level, s.message, {v.key: v.value for v in s.values}
    return None


def _diag_shows(rig, predicate):
    def ok():
        st = _last_status(rig)
        return st is not None and predicate(*st)
    return rig.spin_until(ok)


def _integrity(path) -> str:
    with sqlite3.connect(path) as c:
        return c.execute("PRAGMA integrity_check").fetchone()[0]


def test_disk_full_pauses_asking_keeps_the_outcome_and_saves_it_later(ctx, tmp_path):
    load_site_key(tmp_path / "site_key")
    path = tmp_path / "beliefs.sqlite3"
    rig = Rig(ctx, namespace="/diskfull", store_path=str(path), robot_id="rF",
              min_reask_interval_s=0.0, pending_ask_timeout_s=600.0)
    try:
        assert rig.connected() and rig.show_people([NURSE])
        store = rig.node.store
        key = store.key_for("nurse-a")
        d = rig.open_need("n1", "handover", urgency=1.0)
        assert d["action"] == "ask" and d["person_id"] == "nurse-a"
        fillers = _fill_until_full(store)
        rig.report("n1", "nurse-a", "helped")

        # refused: belief unchanged, outcome held, /diagnostics ERROR naming the cause
        assert rig.node.session.memory.records[key].belief == Belief(2.0, 2.0)
        assert [e.person_key for e in rig.node.held.held] == [key]
        assert store.events_for(key) == []
        assert _diag_shows(rig, lambda level, msg, values: level == DiagnosticStatus.ERROR
                           and "asking paused" in msg and "full" in values["store_last_error"]
                           and values["store_unsaved_outcomes"] == "1")
        # no ask while the outcome is unsaved, whatever the score
        d = rig.open_need("n2", "handover", urgency=1.0)
        assert d["action"] == "continue" and d["policy"] == "store_unavailable"

        # space again: the held outcome is saved in the next housekeeping pass, then asks resume
        _unlimit(store)
        assert rig.spin_until(lambda: not rig.node.held.held)
        assert [e.result for e in store.events_for(key)] == [Result.HELPED]
        assert rig.node.session.memory.records[key].belief == Belief(3.0, 2.0)
        d = rig.open_need("n3", "handover", urgency=1.0)
        assert d["action"] == "ask" and d["policy"] != "store_unavailable"
        assert _diag_shows(rig, lambda level, msg, values: values["store_unsaved_outcomes"] == "0"
                           and level == DiagnosticStatus.OK)
    finally:
        rig.close()
    # no corruption, and exactly what was acknowledged is there after a reopen
    assert _integrity(path) == "ok"
    reopened = SqliteStore(str(path), "rF", load_site_key(tmp_path / "site_key"))
    try:
        assert len(reopened.events_for(key)) == 1
        assert len(reopened.events_for(reopened.key_for("filler-person"))) == fillers
        assert reopened.belief(key)[0] == Belief(3.0, 2.0)
    finally:
        reopened.close()


def test_read_only_store_keeps_outcomes_in_order_until_writable(ctx, tmp_path):
    load_site_key(tmp_path / "site_key")
    path = tmp_path / "beliefs.sqlite3"
    rig = Rig(ctx, namespace="/readonly", store_path=str(path), robot_id="rR",
              min_reask_interval_s=0.0, max_asks_per_need=1, pending_ask_timeout_s=600.0)
    try:
        assert rig.connected()
        people = [{"id": f"nurse-{c}", "distance_m": 1.0, "busyness": 0.0} for c in "bc"]
        assert rig.show_people(people)
        store = rig.node.store
        d1 = rig.open_need("m1", "handover", urgency=1.0)
        d2 = rig.open_need("m2", "handover", urgency=1.0)
        assert d1["action"] == d2["action"] == "ask"
        store._conn.execute("PRAGMA query_only = ON")
        rig.report("m1", d1["person_id"], "declined")
        rig.report("m2", d2["person_id"], "helped")
        assert len(rig.node.held.held) == 2
        assert "readonly" in rig.node.session.status.error
        # still paused on the next passes: the retry is refused too, nothing is dropped
        assert rig.spin_until(lambda: "retry" in rig.node.session.status.error)
        assert len(rig.node.held.held) == 2 and rig.node.held.dropped == 0
        assert rig.open_need("m3", "handover", urgency=1.0)["policy"] == "store_unavailable"
        store._conn.execute("PRAGMA query_only = OFF")
        assert rig.spin_until(lambda: not rig.node.held.held)
        keys = [store.key_for(d1["person_id"]), store.key_for(d2["person_id"])]
        assert [store.events_for(k)[0].result for k in keys] == [Result.DECLINED, Result.HELPED]
    finally:
        rig.close()
    assert _integrity(path) == "ok"


def test_unreadable_store_at_decision_time_asks_nobody_and_keeps_running(ctx, tmp_path):
    load_site_key(tmp_path / "site_key")
    rig = Rig(ctx, namespace="/ioerror", store_path=str(tmp_path / "b.sqlite3"), robot_id="rI")
    try:
        assert rig.connected() and rig.show_people([NURSE])
        store = rig.node.store
        real = store.is_opted_out

        def broken(key):
            raise sqlite3.OperationalError("disk I/O error")
        store.is_opted_out = broken
        d = rig.open_need("k1", "handover", urgency=1.0)
        assert d["action"] == "continue" and d["policy"] == "store_unavailable"
        assert "disk I/O error" in rig.node.session.status.error
        store.is_opted_out = real          # the disk is back: the node decides as before
        d = rig.open_need("k2", "handover", urgency=1.0)
        assert d["action"] == "ask"
    finally:
        rig.close()


def test_forget_drops_an_outcome_held_for_a_full_store(ctx, tmp_path):
    """Privacy comes first while the store is full.

    Privacy comes first: a person forgotten while their outcome waits for disk space is never
    written once space returns.
    """
    load_site_key(tmp_path / "site_key")
    path = tmp_path / "beliefs.sqlite3"
    rig = Rig(ctx, namespace="/heldforget", store_path=str(path), robot_id="rG",
              pending_ask_timeout_s=600.0)
    try:
        assert rig.connected() and rig.show_people([NURSE])
        store = rig.node.store
        key = store.key_for("nurse-a")
        assert rig.open_need("f1", "handover", urgency=1.0)["action"] == "ask"
        _fill_until_full(store)
        rig.report("f1", "nurse-a", "declined")
        assert len(rig.node.held.held) == 1
        _unlimit(store)
        rig.node.session.forgotten(key)    # what a forget on privacy_request calls
        store.forget(key)
        rig.spin_until(lambda: False, timeout_s=1.5)   # three housekeeping passes
        assert store.events_for(key) == [] and rig.node.held.held == []
    finally:
        rig.close()


def test_fleet_event_during_a_full_store_is_kept_and_not_shared_again(ctx, tmp_path):
    """A fleet event refused by a full store stays queued.

    A peer's event arrives once (transient local history is not resent to a subscriber that already
    has it), so one the store refuses stays queued in the fleet link and is stored once space
    returns; only our own outcome then goes out on the fleet topic, never the peer's copy.
    """
    from helpaware_node.fleet_documents import encode_document
    from helpaware_node.ros.fleet import fleet_qos, FLEET_TOPIC
    from std_msgs.msg import String
    load_site_key(tmp_path / "site_key")
    rig = Rig(ctx, namespace="/fleetfull", store_path=str(tmp_path / "b.sqlite3"),
              robot_id="rP", pending_ask_timeout_s=600.0)
    shared = []
    rig.driver.create_subscription(String, FLEET_TOPIC, lambda m: shared.append(m.data),
                                   fleet_qos())
    try:
        assert rig.connected() and rig.show_people([NURSE])
        store = rig.node.store
        assert rig.open_need("q1", "handover", urgency=1.0)["action"] == "ask"
        _fill_until_full(store)
        visitor = store.key_for("visitor-1")
        peer = StoredEvent("peer/7", visitor, 50.0, Result.HELPED, 0.1, 0.0)
        text = encode_document("outcome", peer, rig.node.fleet.keys)   # a peer of this site
        rig.node.fleet._on_message(String(data=text))   # as the topic delivers it
        rig.report("q1", "nurse-a", "helped")
        # queued: the peer's event (and the echo of our own ask, which the topic also
        # delivers to us; storing it again is a no-op)
        assert "peer/7" in {e.event_id for e in rig.node.fleet._queued}
        assert rig.node.fleet.store_failures >= 1
        assert [e.person_key for e in rig.node.held.held] == [store.key_for("nurse-a")]
        assert visitor not in rig.node.session.memory.records
        _unlimit(store)
        assert rig.spin_until(lambda: not rig.node.held.held and rig.node.fleet.queued_count == 0)
        assert [e.event_id for e in store.events_for(visitor)] == ["peer/7"]
        # learned once stored: the belief the session loads is the store's fold
        assert rig.node.session.memory.record_for(visitor).belief == store.belief(visitor)[0]
        assert store.belief(visitor)[0].a == 3.0
        own = store.events_for(store.key_for("nurse-a"))[0].event_id
        assert rig.spin_until(lambda: any(f'"{own}"' in m for m in shared))
        rig.spin_until(lambda: False, timeout_s=1.0)
        assert not any('"peer/7"' in m for m in shared)
    finally:
        rig.close()

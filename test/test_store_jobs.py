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

"""Forget, opt-out and compaction off the caller's thread (store/jobs.py).

In force in memory at once, written on the worker's own connection, reported back on the caller's
thread, and durable once reported; opt-outs held in memory agree with the table by every route.
"""
import glob
import sqlite3
import subprocess
import sys
import threading

from helpaware_node.core import fold_events, Result
from helpaware_node.fleet_documents import encode_document, PrivacyAct
from helpaware_node.ros.fleet import merge
from helpaware_node.store import AskEvent, SqliteStore, StoredEvent
from helpaware_node.store.jobs import StoreJobs
import pytest

KEY = b"j" * 32


def fill(store, people=6, events=60, t0=0.0):
    keys = [store.key_for(f"guest-{i}") for i in range(people)]
    for i in range(events):
        k = keys[i % people]
        assert store.append(StoredEvent(store.next_event_id(), k, t0 + 10.0 * i,
                                        list(Result)[i % 4], 0.3, 0.2, "door"))
        if i % 3 == 0:
            store.append_asks([AskEvent(store.next_event_id(), k, t0 + 10.0 * i, "door",
                                        f"need-{i}")])
    return keys


def rows_in_table(path, table, key):
    """Read by a connection of its own: what is on disk, not what the store holds."""
    conn = sqlite3.connect(str(path))
    try:
        return conn.execute(f"SELECT count(*) FROM {table} WHERE person_key = ?",
                            (key,)).fetchone()[0]
    finally:
        conn.close()


def file_bytes(path):
    return b"".join(open(p, "rb").read() for p in glob.glob(str(path) + "*"))


class HeldWriter:
    """Holds the file's write lock from a third connection.

    So the worker's job waits and the test sees the state between the request and the rows being
    written.
    """

    def __init__(self, path):
        self.conn = sqlite3.connect(str(path), isolation_level=None, check_same_thread=False)
        self.conn.execute("BEGIN IMMEDIATE")

    def release(self):
        self.conn.execute("ROLLBACK")
        self.conn.close()


def test_forget_is_in_force_at_once_and_reported_on_the_callers_thread(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    keys = fill(store)
    gone, kept = keys[0], keys[1]
    kept_belief = store.belief(kept)
    reports = []
    jobs = StoreJobs(store)
    held = HeldWriter(path)
    try:
        job = jobs.forget(gone, lambda j: reports.append((j, threading.get_ident())))
        # the worker waits for the lock: nothing is deleted on disk yet ...
        assert rows_in_table(path, "events", gone) == 10
        # ... but every read of the store has forgotten the person already
        assert store.belief(gone)[1] is None and store.events_for(gone) == []
        assert gone not in store.keys() and store.asks(person_key=gone) == []
        assert all(a.person_key != gone for a in store.asks())
        assert not store.append(StoredEvent(store.next_event_id(), gone, 9999.0,
                                            Result.HELPED, 0.1, 0.0))
        assert jobs.poll() == [] and not job.done
    finally:
        held.release()
    assert jobs.wait(30.0)
    assert [r[0] for r in reports] == [job] and job.error is None and job.result == 10
    assert reports[0][1] == threading.get_ident()      # on_done ran here, not on the worker
    for table in ("events", "asks", "snapshot"):
        assert rows_in_table(path, table, gone) == 0
    assert gone.encode() not in file_bytes(path)
    assert store.belief(kept) == kept_belief and rows_in_table(path, "events", kept) == 10
    # after the report the person may be learned about again (a new encounter)
    assert store.append(StoredEvent(store.next_event_id(), gone, 9999.0, Result.HELPED,
                                    0.1, 0.0))
    jobs.close()
    store.close()


def test_a_forget_the_store_refuses_is_reported_and_loses_nothing(tmp_path, monkeypatch):
    store = SqliteStore(tmp_path / "b.sqlite3", "r1", KEY)
    keys = fill(store)
    before = store.events_for(keys[0])

    def refuse(conn, key):
        raise sqlite3.OperationalError("database or disk is full")
    monkeypatch.setattr(store, "forget_rows", refuse)
    jobs = StoreJobs(store)
    reports = []
    jobs.forget(keys[0], reports.append)
    assert jobs.wait(30.0)
    assert isinstance(reports[0].error, sqlite3.OperationalError) and jobs.failures == 1
    assert store.events_for(keys[0]) == before       # visible again, nothing lost
    jobs.close()
    store.close()


def test_opt_out_by_every_route_is_respected_at_once_and_after_a_restart(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "peer", KEY)
    keys = fill(store, people=4)
    direct, worker, peer, stranger = keys[0], keys[1], keys[2], store.key_for("never-seen")
    jobs = StoreJobs(store)
    held = HeldWriter(path)
    try:
        jobs.opt_out(worker)
        assert store.is_opted_out(worker) and rows_in_table(path, "opt_out", worker) == 0
        assert not store.append(StoredEvent(store.next_event_id(), worker, 1e4,
                                            Result.HELPED, 0.1, 0.0))
        assert store.append_asks([AskEvent(store.next_event_id(), worker, 1e4)]) == []
    finally:
        held.release()
    assert jobs.wait(30.0)
    store.opt_out(direct)
    # a peer's signed opt-out, as the fleet topic delivers it
    act = PrivacyAct.new("opt_out", peer, "other-robot", request_id="")
    merge(store, encode_document("opt_out", act, store.site_keys.key_ring()),
          store.site_keys.key_ring())
    jobs.opt_out(stranger)
    assert jobs.wait(30.0)
    for k in (direct, worker, peer, stranger):
        assert store.is_opted_out(k) and rows_in_table(path, "opt_out", k) == 1
    assert not store.is_opted_out(keys[3])
    assert set(store.opted_out()) == {direct, worker, peer, stranger}
    jobs.close()
    store.close()
    again = SqliteStore(path, "peer", KEY)
    assert set(again.opted_out()) == {direct, worker, peer, stranger}
    assert all(again.is_opted_out(k) for k in (direct, worker, peer, stranger))
    assert not again.append(StoredEvent(again.next_event_id(), peer, 2e4, Result.HELPED,
                                        0.1, 0.0))
    # forget removes the opt-out entry (docs/store.md), in memory and on disk
    again.forget(direct)
    assert not again.is_opted_out(direct)
    again.close()
    assert not SqliteStore(path, "peer", KEY).is_opted_out(direct)


def test_compaction_on_the_worker_keeps_every_belief_and_every_concurrent_append(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    keys = fill(store, people=30, events=900)
    stored = {k: store.events_for(k) for k in keys}
    jobs = StoreJobs(store)
    reports = []
    jobs.compact(0.0, now_s=4500.0, on_done=reports.append)
    # the node goes on appending while the worker compacts (one commit per batch of people)
    for i in range(200):
        e = StoredEvent(store.next_event_id(), keys[i % 30], 9000.0 + i, list(Result)[i % 4],
                        0.2, 0.1, "door")
        assert store.append(e)
        stored[e.person_key].append(e)
    assert jobs.wait(60.0)
    assert reports and reports[0].error is None and reports[0].result > 0
    model = store.model
    for k in keys:      # the fold of everything ever stored: compaction changes no belief
        expect, last = fold_events([e.to_outcome() for e in stored[k]], model)
        got, got_last = store.belief(k)
        assert got_last == last
        assert got.a == pytest.approx(expect.a, rel=1e-12)
        assert got.b == pytest.approx(expect.b, rel=1e-12)
    assert store.counts()["events"] + store.counts()["compacted_events"] == 1100
    jobs.close()
    store.close()


CRASHER = r"""
import os, sys
from helpaware_node.store import SqliteStore
from helpaware_node.store.jobs import StoreJobs
store = SqliteStore(sys.argv[1], "r1", b"j" * 32)
jobs = StoreJobs(store)
done = []
getattr(jobs, sys.argv[2])(sys.argv[3], done.append)
assert jobs.wait(30.0) and done and done[0].error is None
print("reported", flush=True)
os._exit(0)          # no close, no checkpoint at exit: as a crash right after the report
"""


@pytest.mark.parametrize("action", ["forget", "opt_out"])
def test_a_reported_job_survives_a_crash(tmp_path, action):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    keys = fill(store)
    store.close()
    out = subprocess.run([sys.executable, "-c", CRASHER, str(path), action, keys[0]],
                         capture_output=True, text=True, timeout=120)
    assert out.stdout.strip() == "reported", out.stderr
    again = SqliteStore(path, "r1", KEY)
    if action == "forget":
        assert again.events_for(keys[0]) == [] and keys[0] not in again.keys()
        assert keys[0].encode() not in file_bytes(path)
    else:
        assert again.is_opted_out(keys[0]) and len(again.events_for(keys[0])) == 10
    assert len(again.events_for(keys[1])) == 10
    again.close()


def test_retention_at_open_runs_on_the_worker_and_is_in_force_at_once(tmp_path):
    """Opening compacts nothing; reads leave out what retention deletes; the worker deletes it."""
    import time
    path = tmp_path / "s.sqlite3"
    now = time.time()
    store = SqliteStore(path, "r1", KEY)
    old = fill(store, people=3, events=30, t0=now - 40 * 86400.0)     # 40 days ago
    fill(store, people=3, events=12, t0=now - 86400.0)                # yesterday
    before = {k: store.belief(k) for k in old}
    store.close()

    store = SqliteStore(path, "r1", KEY, retention_days=30.0)
    try:
        # the opener did not compact: every event is still in the file ...
        assert store.counts()["events"] == 42 and store.counts()["compacted_events"] == 0
        # ... but the reads keep the retention at once, and no belief moves
        assert all(e.time_s >= now - 30 * 86400.0 for k in old for e in store.events_for(k))
        assert sum(len(store.events_for(k)) for k in old) == 12
        assert all(a.time_s >= now - 30 * 86400.0 for a in store.asks())
        assert {k: store.belief(k) for k in old} == before
        jobs = StoreJobs(store)                 # takes the retention over at once
        assert jobs.wait(60.0) and jobs.failures == 0
        counts = store.counts()
        assert counts["events"] == 12 and counts["compacted_events"] == 30
        assert {k: store.belief(k) for k in old} == before
        assert store._retention_cutoff_s is None
        jobs.close()
    finally:
        store.close()


def test_retention_at_open_without_a_worker_runs_when_the_caller_asks(tmp_path):
    import time
    path = tmp_path / "s.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    fill(store, people=2, events=10, t0=time.time() - 40 * 86400.0)
    store.close()
    store = SqliteStore(path, "r1", KEY, retention_days=30.0)
    try:
        assert store.counts()["events"] == 10
        assert store.run_retention() == 10
        assert store.counts()["events"] == 0 and store.counts()["compacted_events"] == 10
    finally:
        store.close()

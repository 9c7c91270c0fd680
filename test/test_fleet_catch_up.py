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

"""A late joiner gets every event its peers hold (within the history depth).

Found: `fleet/outcomes` has no key, so a reader's keep-last depth is ONE queue shared by all
writers. Two peers holding D events each offer 2 D to a late joiner whose reader kept D, and
what the reader could not take while the histories arrived was overwritten or discarded.
Before the fix, with D = 300 (the CI size): 300, 305 and 316 merged of 600 in three runs
(D = 500: 504-522 of 1 000; D = 1 000: 1 029-1 045 of 2 000; the soak size, 2 x 3 000 into
5 000, lost only on some runs: 5 098 and 6 000). Fixed in ros/fleet.py: the reader keeps all,
the callback only queues, and a timer stores the queue in sorted batches.

Checks against outside sources: the expected event ids are the ones loaded into the peers
here; the late joiner's store is read with the sqlite3 module (not the store class), and its
beliefs are core.person.fold_events over the union of the peers' events in (time, event id)
order, the fold the design defines.
"""
import queue
import random
import sqlite3
import subprocess
import sys
import threading
import time

import pytest

rclpy = pytest.importorskip("rclpy")
# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node.core import Belief, fold_events, Result, SiteModel  # noqa: E402,I100
from helpaware_node.core.model import CoreInputError  # noqa: E402
from helpaware_node.fleet_documents import encode_document, PrivacyAct  # noqa: E402
from helpaware_node.ros.fleet import FleetLink  # noqa: E402
from helpaware_node.store import SiteKeys, SqliteStore, StoredEvent  # noqa: E402
from rclpy.context import Context  # noqa: E402
from site_keys import write_site_key  # noqa: E402
from std_msgs.msg import String  # noqa: E402

SITE_KEY = bytes(range(40, 72))
DEPTH = 300                  # history per publisher; the peers hold exactly that many each
PEERS = ("ward1", "ward2")
STAFF = 30
KEYS = SiteKeys.single(SITE_KEY).key_ring()      # what the peers here sign with


def encode_event(e: StoredEvent) -> str:
    return encode_document("outcome", e, KEYS)


def encode_forget(key: str, sender: str) -> str:
    return encode_document("forget", PrivacyAct.new("forget", key, sender), KEYS)


def peer_events(store, robot_id: str, n: int, offset_s: float) -> list[StoredEvent]:
    return [StoredEvent(f"{robot_id}/{i + 1}", store.key_for(f"night-staff-{i % STAFF}"),
                        1000.0 + i + offset_s, list(Result)[i % 3], 0.2, 0.0, "door")
            for i in range(n)]


def start_peer(tmp_path, key_path, robot_id):
    proc = subprocess.Popen(
        [sys.executable, "-m", "helpaware_node.ros.fleet", "--store",
         str(tmp_path / f"{robot_id}.sqlite3"), "--key-file", str(key_path), "--robot-id",
         robot_id, "--depth", str(DEPTH)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
        bufsize=1)
    lines: queue.Queue = queue.Queue()
    threading.Thread(target=lambda: [lines.put(x.strip()) for x in proc.stdout],
                     daemon=True).start()
    return proc, lines


def stop_peer(proc):
    try:
        proc.stdin.write("quit\n")
        proc.stdin.flush()
        proc.wait(timeout=15)
    except Exception:
        proc.kill()
        proc.wait()


def read_late_store(path):
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=10.0)
    try:
        ids = {r[0] for r in conn.execute("SELECT event_id FROM events")}
        snapshot = {r[0]: Belief(r[1], r[2])
                    for r in conn.execute("SELECT person_key, a, b FROM snapshot")}
    finally:
        conn.close()
    return ids, snapshot


def test_late_joiner_merges_every_event_of_two_full_peer_histories(tmp_path):
    key_path = write_site_key(tmp_path, SITE_KEY)
    offered = {}
    for j, rid in enumerate(PEERS):
        s = SqliteStore(tmp_path / f"{rid}.sqlite3", rid, SITE_KEY)
        offered[rid] = peer_events(s, rid, DEPTH, 0.5 * j)
        s.bulk_load(offered[rid])
        s.close()
    all_offered = {e.event_id: e for evs in offered.values() for e in evs}
    peers = [start_peer(tmp_path, key_path, rid) for rid in PEERS]
    merged: list[str] = []
    try:
        for _, lines in peers:
            assert lines.get(timeout=60.0) == "ready"
        t0 = time.monotonic()
        late = start_peer(tmp_path, key_path, "late")
        peers.append(late)
        while len(merged) < len(all_offered):   # bounded: stops after 15 s without a merge
            try:
                line = late[1].get(timeout=15.0)
            except queue.Empty:
                break
            if line.startswith("merged "):
                merged.append(line.split()[1])
        elapsed_s = time.monotonic() - t0
    finally:
        for proc, _ in peers:
            stop_peer(proc)
    print(f"\nlate joiner: merged {len(set(merged))} of {len(all_offered)} offered by "
          f"{len(PEERS)} peers of depth {DEPTH} ({elapsed_s:.1f} s from its start)")
    assert len(merged) == len(set(merged)), "an event was merged twice"
    assert set(merged) == all_offered.keys(), (
        f"{len(all_offered) - len(set(merged))} of {len(all_offered)} never merged")
    ids, snapshot = read_late_store(tmp_path / "late.sqlite3")
    assert ids == all_offered.keys()
    model = SiteModel()
    for key in {e.person_key for e in all_offered.values()}:
        mine = sorted((e for e in all_offered.values() if e.person_key == key),
                      key=lambda e: (e.time_s, e.event_id))
        assert snapshot[key] == fold_events([e.to_outcome() for e in mine], model)[0]


# -- the link's own rules, messages handed to its subscription callback directly ----------
@pytest.fixture
def link_node():
    ctx = Context()
    rclpy.init(context=ctx)
    node = rclpy.create_node("catch_up_rules", context=ctx)
    yield node
    node.destroy_node()
    rclpy.try_shutdown(context=ctx)


def deliver(link, text):
    link._on_delivery(String(data=text))       # what the subscription calls


def test_stored_before_learning_idempotent_and_forget_blocks_queued_events(tmp_path,
                                                                           link_node):
    store = SqliteStore(tmp_path / "rules.sqlite3", "here", SITE_KEY)
    seen_stored = []

    def on_merged(events):        # at this moment every event must already be in the store
        seen_stored.append([any(x.event_id == e.event_id for x in store.events_for(e.person_key))
                            for e in events])

    try:
        link = FleetLink(link_node, store, on_merged, replay=False)
        ka, kb = store.key_for("nurse-anna"), store.key_for("porter-bo")
        a = StoredEvent("peer/1", ka, 10.0, Result.HELPED, 0.1, 0.0, "door")
        b = StoredEvent("peer/2", kb, 11.0, Result.DECLINED, 0.1, 0.0, "door")
        b_old = StoredEvent("peer/0", kb, 5.0, Result.HELPED, 0.1, 0.0, "door")
        for e in (a, b, a):
            deliver(link, encode_event(e))
        assert store.counts()["events"] == 0 and link.queued_count == 3   # only queued
        deliver(link, encode_forget(kb, "peer"))     # applied at once
        deliver(link, encode_event(b_old))           # an older copy replayed by a peer
        deliver(link, "not json")
        assert link.refused_count == 1
        assert link._store_queued() == 1             # the timer's tick
        assert [e.event_id for e in store.iter_events()] == ["peer/1"]
        assert seen_stored == [[True]] and link.merged_count == 1
        deliver(link, encode_event(a))               # duplicate after storing: nothing new
        assert link.flush() == 0 and link.merged_count == 1 and link.queued_count == 0
        assert store.events_for(kb) == []
    finally:
        store.close()


def test_owner_append_sees_a_batch_in_time_order(tmp_path, link_node):
    store = SqliteStore(tmp_path / "order.sqlite3", "here", SITE_KEY)
    calls = []

    def owner_append(event):              # as the node's _ingest_fleet_event: store, then learn
        calls.append(event.event_id)
        return store.append(event)

    try:
        link = FleetLink(link_node, store, append=owner_append, replay=False)
        key = store.key_for("nurse-anna")
        events = [StoredEvent(f"peer/{i}", key, 100.0 - i, Result.HELPED, 0.1, 0.0, "door")
                  for i in range(1, 21)]
        for e in events:
            deliver(link, encode_event(e))
        assert link.flush() == 20
        assert calls == [e.event_id for e in sorted(events, key=lambda e: e.time_s)]
        expected, _ = fold_events(sorted((e.to_outcome() for e in events),
                                         key=lambda o: o.time_s), SiteModel())
        assert store.belief(key)[0] == expected
    finally:
        store.close()


def test_owner_batch_ingest_gets_each_batch_once_and_sorted(tmp_path, link_node):
    store = SqliteStore(tmp_path / "owner_batch.sqlite3", "here", SITE_KEY)
    batches = []

    def owner_append_many(events):      # a node that learns once per batch
        batches.append([e.event_id for e in events])
        return store.append_many(events)

    try:
        link = FleetLink(link_node, store, append=lambda e: False, replay=False,
                         append_many=owner_append_many)
        key = store.key_for("porter-bo")
        events = [StoredEvent(f"peer/{i}", key, float(50 - i), Result.DECLINED, 0.2, 0.1)
                  for i in range(1, 8)]
        for e in events + events[:2]:             # two duplicates
            deliver(link, encode_event(e))
        assert link.flush() == 7 and link.merged_count == 7
        assert batches == [[e.event_id for e in sorted(events + events[:2],
                                                       key=lambda e: e.time_s)]]
        assert sorted(x.event_id for x in store.events_for(key)) == sorted(
            e.event_id for e in events)
    finally:
        store.close()


def test_append_many_is_all_or_nothing_and_equals_the_fold(tmp_path):
    rng = random.Random(11)
    store = SqliteStore(tmp_path / "batch.sqlite3", "here", SITE_KEY)
    try:
        keys = [store.key_for(f"p{i}") for i in range(4)]
        events = [StoredEvent(f"r{i % 3}/{i}", keys[i % 4], float(rng.randint(0, 50)),
                              list(Result)[i % 3], 0.3, 0.2, "door") for i in range(120)]
        first, rest = events[:60], events[60:]
        assert len(store.append_many(first)) == 60
        shuffled = rest + first[:10]                  # out of order, and 10 duplicates
        rng.shuffle(shuffled)
        assert {e.event_id for e in store.append_many(shuffled)} == {e.event_id for e in rest}
        model = store.model
        for k in keys:
            mine = sorted((e for e in events if e.person_key == k),
                          key=lambda e: (e.time_s, e.event_id))
            assert store.belief(k)[0] == fold_events([e.to_outcome() for e in mine], model)[0]
        bad = [StoredEvent("x/1", keys[0], 60.0, Result.HELPED, 0.1, 0.0),
               StoredEvent("x/2", "raw-id", 61.0, Result.HELPED, 0.1, 0.0)]
        with pytest.raises(CoreInputError, match="person_key"):
            store.append_many(bad)
        assert store.counts()["events"] == 120        # nothing of the refused batch
    finally:
        store.close()

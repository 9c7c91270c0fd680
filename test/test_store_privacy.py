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

"""Privacy: raw ids never reach the store's bytes; forget leaves no trace of the key."""
import glob
import os
import random

from helpaware_node.core import Result
from helpaware_node.store import AskEvent, SqliteStore, StoredEvent
from helpaware_node.store.jobs import StoreJobs
from hypothesis import given, settings, strategies as st
import pytest

KEY = os.urandom(32)
RAW_IDS = ["badge-7731-ward-C", "nurse-ingrid-olsen", "porter_42_night"]


def store_bytes(path):
    """Return the database and every companion file (-wal, -shm, -journal) as bytes."""
    return {p: open(p, "rb").read() for p in glob.glob(str(path) + "*")}


def scenario(store):
    keys = [store.key_for(r) for r in RAW_IDS]
    for i in range(90):
        e = StoredEvent(store.next_event_id(), keys[i % 3], 10.0 * i, list(Result)[i % 4],
                        0.4, 0.2, "door")
        assert store.append(e)
        if i % 2 == 0:     # the asks behind them (a peer's every fourth): the limits' history
            eid = f"r2/{i}" if i % 4 == 0 else store.next_event_id()
            ask = AskEvent(eid, keys[i % 3], 10.0 * i, "door", f"need-{i}")
            assert store.append_asks([ask]) == [ask]
    store.opt_out(keys[2])
    return keys


def test_no_raw_id_in_db_wal_or_journal(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    scenario(store)
    open_files = store_bytes(path)          # while open: the WAL holds recent pages
    assert any(p.endswith("-wal") and len(b) > 0 for p, b in open_files.items())
    store.compact(older_than_s=0.0, now_s=450.0)
    store.close()
    for files in (open_files, store_bytes(path)):
        for name, data in files.items():
            for raw in RAW_IDS:
                assert raw.encode() not in data, f"{raw} found in {name}"
            assert KEY not in data and KEY.hex().encode() not in data


@pytest.mark.parametrize("seed", range(3))
def test_forget_removes_every_row_and_every_byte_of_the_key(tmp_path, seed):
    # several site keys: whether a key lands in an interior index page depends on its value
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", random.Random(seed).randbytes(32))
    keys = scenario(store)
    store.compact(older_than_s=0.0, now_s=300.0)    # some history folded into the base
    gone, kept = keys[0], keys[1]
    store.opt_out(gone)
    assert store.forget(gone) == 30
    # no row in any table holds the key
    conn = store._conn
    tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")]
    for table in tables:
        for row in conn.execute(f"SELECT * FROM {table}"):
            assert gone not in [str(v) for v in row], f"key still in {table}"
    assert not store.is_opted_out(gone) and gone not in store.keys()
    assert kept in store.keys() and store.is_opted_out(keys[2])
    # and no byte of it lingers in the file, its free pages or the WAL (secure_delete + TRUNCATE)
    for name, data in store_bytes(path).items():
        assert gone.encode() not in data, f"forgotten key bytes in {name}"
    store.close()
    for name, data in store_bytes(path).items():
        assert gone.encode() not in data and kept.encode() in open(path, "rb").read()


def test_forget_leaves_no_bytes_in_a_store_with_deep_indexes(tmp_path):
    # enough people that every index has interior pages holding keys as dividers
    path = tmp_path / "big.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    keys = [store.key_for(f"visitor-{i}") for i in range(1500)]
    store.bulk_load(StoredEvent(f"r1/{i}", keys[i % 1500], float(i), list(Result)[i % 4],
                                0.2, 0.1) for i in range(6000))
    for k in keys[::50]:
        store.opt_out(k)
    victims = keys[::37]
    for k in victims:
        store.forget(k)
    blob = b"".join(store_bytes(path).values())
    assert keys[1].encode() in blob                # the search does find present keys
    for k in victims:
        assert k.encode() not in blob
    store.close()


def test_store_files_are_owner_only(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    scenario(store)
    modes = {p: os.stat(p).st_mode & 0o777 for p in glob.glob(str(path) + "*")}
    assert len(modes) >= 2 and set(modes.values()) == {0o600}, modes
    store.close()


OPS = st.lists(st.tuples(st.sampled_from(["append", "ask", "compact", "opt_out", "forget"]),
                         st.integers(0, 11), st.floats(0.0, 1.0)), min_size=5, max_size=60)


@settings(max_examples=40)
@given(seed=st.binary(min_size=32, max_size=32), ops=OPS, victim=st.integers(0, 11))
def test_no_byte_of_a_forgotten_key_after_forget_and_compaction(tmp_path_factory, seed, ops,
                                                                victim):
    """Whatever came before, after forget + compaction the key's bytes are nowhere in the file.

    Its free pages or the WAL (searched raw), while a key kept is still found.
    """
    path = tmp_path_factory.mktemp("leak") / "b.sqlite3"
    store = SqliteStore(path, "r1", seed)
    keys = [store.key_for(f"visitor-{i}") for i in range(12)]
    for i in range(240):                        # several pages: interior index pages too
        k = keys[i % 12]
        store.append(StoredEvent(store.next_event_id(), k, 10.0 * i, list(Result)[i % 4],
                                 0.3, 0.2, "door"))
        if i % 3 == 0:
            store.append_asks([AskEvent(store.next_event_id(), k, 10.0 * i, "door", f"q{i}")])
    t = 3000.0
    for op, who, x in ops:
        t += 10.0 * x
        k = keys[who]
        if op == "append":
            store.append(StoredEvent(store.next_event_id(), k, t, list(Result)[who % 4],
                                     x, 0.1, "door"))
        elif op == "ask":
            store.append_asks([AskEvent(store.next_event_id(), k, t, "door", f"n{t}")])
        elif op == "compact":
            store.compact(0.0, now_s=t * x)
        elif op == "opt_out":
            store.opt_out(k)
        else:
            store.forget(k)
    gone = keys[victim]
    jobs = StoreJobs(store)
    jobs.forget(gone)
    jobs.compact(0.0, now_s=t * 0.7)
    assert jobs.wait(60.0) and jobs.failures == 0
    blob = b"".join(store_bytes(path).values())
    assert gone.encode() not in blob
    kept = [k for k in keys if k != gone and store.events_for(k)]
    assert not kept or kept[0].encode() in blob     # the search finds keys that are there
    jobs.close()
    store.close()
    assert gone.encode() not in b"".join(store_bytes(path).values())

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

"""The SQLite store: snapshot equals the refold, restart is exact, compaction keeps beliefs.

Migrations, site key checks, and damaged files moved aside.
"""
import os
import sqlite3

from helpaware_node.core import Belief, fold_events, Result, SiteModel
from helpaware_node.core.model import CoreInputError
from helpaware_node.store import open_store, schema, SiteKeyError, SqliteStore, StoredEvent
from helpaware_node.store.keys import load_site_key
from hypothesis import given, settings, strategies as st
import pytest

MODEL = SiteModel(evidence_half_life_s=7200.0)
KEY = b"s" * 32


def make_store(tmp_path, name="b.sqlite3", robot="r1", model=MODEL, key=KEY):
    return SqliteStore(tmp_path / name, robot, key, model=model)


def refold(events, key, model=MODEL):
    return fold_events([e.to_outcome() for e in events if e.person_key == key], model)


event_st = st.tuples(st.integers(0, 3), st.floats(0, 5000, allow_nan=False),
                     st.sampled_from(list(Result)), st.floats(0, 1), st.floats(0, 3))


@settings(max_examples=25)
@given(st.lists(event_st, min_size=1, max_size=25))
def test_snapshot_equals_refold_in_any_append_order(tmp_path_factory, rows):
    # outside reference: core.person.fold_events over the events sorted by (time, event id)
    store = make_store(tmp_path_factory.mktemp("s"))
    people = [store.key_for(f"nurse-{i}") for i in range(4)]
    events = [StoredEvent(f"r{i % 3}/{i}", people[p], t, r, x, f)
              for i, (p, t, r, x, f) in enumerate(rows)]
    for e in events:
        assert store.append(e)
    for key in {e.person_key for e in events}:
        assert store.belief(key, MODEL) == refold(events, key)
    store.close()


def test_beliefs_survive_restart_exactly(tmp_path):
    store = make_store(tmp_path)
    keys = [store.key_for(f"porter-{i}") for i in range(5)]
    events = [StoredEvent(store.next_event_id(), keys[i % 5], 37.0 * i, list(Result)[i % 4],
                          (i % 7) / 7, (i % 3) * 0.4) for i in range(60)]
    for e in reversed(events):          # out of order: exercises the refold path too
        assert store.append(e)
    before = {k: store.belief(k, MODEL) for k in keys}
    store.close()
    again = make_store(tmp_path)
    for k in keys:
        (b1, t1), (b2, t2) = before[k], again.belief(k, MODEL)
        assert abs(b1.a - b2.a) <= 1e-12 and abs(b1.b - b2.b) <= 1e-12 and t1 == t2
        assert again.belief(k, MODEL) == refold(events, k)
    # sequence numbers continue after a restart: no event id is ever reused
    assert again.next_event_id() == "r1/61"
    again.close()


def test_exact_algebra_helped_and_certain_decline(tmp_path):
    # exact algebra (DESIGN.md section 3): helped -> a + 1; declined at c = 1 -> b + 1
    model = SiteModel(prior_a=2.0, prior_b=3.0, evidence_half_life_s=0.0)
    store = make_store(tmp_path, model=model)
    k = store.key_for("cleaner")
    for i, r in enumerate([Result.HELPED, Result.HELPED, Result.DECLINED]):
        store.append(StoredEvent(f"r1/{i}", k, float(i), r, 0.0, 0.0))
    b, _ = store.belief(k)
    assert b.a == pytest.approx(4.0, abs=1e-12) and b.b == pytest.approx(4.0, abs=1e-12)


def test_duplicates_opt_out_and_bad_events(tmp_path):
    store = make_store(tmp_path)
    k = store.key_for("nurse-a")
    e = StoredEvent("r1/1", k, 1.0, Result.HELPED, 0.1, 0.0)
    assert store.append(e) and not store.append(e)
    store.opt_out(k)
    assert store.is_opted_out(k)
    assert not store.append(StoredEvent("r1/2", k, 2.0, Result.HELPED, 0.1, 0.0))
    with pytest.raises(CoreInputError, match="person_key"):
        store.append(StoredEvent("r1/3", "nurse-b", 2.0, Result.HELPED, 0.1, 0.0))
    with pytest.raises(CoreInputError, match="busyness"):
        store.append(StoredEvent("r1/4", k, 2.0, Result.HELPED, 1.5, 0.0))
    with pytest.raises(CoreInputError, match="event_id"):
        store.append(StoredEvent("nosequence", k, 2.0, Result.HELPED, 0.1, 0.0))
    assert [x.event_id for x in store.events_for(k)] == ["r1/1"]


def test_compaction_keeps_beliefs_and_deletes_old_events(tmp_path):
    store = make_store(tmp_path)
    keys = [store.key_for(f"p{i}") for i in range(3)]
    events = [StoredEvent(f"r1/{i}", keys[i % 3], 100.0 * i, list(Result)[i % 3], 0.3, 0.5)
              for i in range(40)]
    store.extend(events)
    before = {k: store.belief(k) for k in keys}
    removed = store.compact(older_than_s=1000.0, now_s=3000.0)   # cutoff t = 2000
    assert removed == 20
    assert all(e.time_s >= 2000.0 for k in keys for e in store.events_for(k))
    for k in keys:
        assert store.belief(k) == before[k] == refold(events, k)
    # more events after compaction still fold in order; a late event behind the base is refused
    late = StoredEvent("r2/1", keys[0], 50.0, Result.HELPED, 0.0, 0.0)
    assert not store.append(late)
    new = StoredEvent("r2/2", keys[0], 9000.0, Result.HELPED, 0.0, 0.0)
    assert store.append(new)
    assert store.belief(keys[0]) == refold(events + [new], keys[0])
    store.close()
    assert make_store(tmp_path).belief(keys[0]) == refold(events + [new], keys[0])


def test_migration_from_version_1_rebuilds_snapshots(tmp_path):
    path = tmp_path / "old.sqlite3"
    conn = sqlite3.connect(path, isolation_level=None)
    schema.migrate(conn, target=1)
    k = "ab" * 32
    insert = ("INSERT INTO events (event_id, person_key, time_s, busyness, ask_load, result, "
              "request_kind) VALUES (?, ?, ?, 0.2, 0.0, ?, '')")
    conn.execute(insert, ("r9/1", k, 5.0, "helped"))
    conn.execute(insert, ("r9/2", k, 6.0, "declined"))
    conn.close()
    store = SqliteStore(path, "r1", KEY, model=MODEL)
    assert store.counts()["schema_version"] == schema.SCHEMA_VERSION == 4
    assert store.belief(k) == refold(store.events_for(k), k)
    assert store.belief(k)[0] != Belief.prior(MODEL)


def test_migration_of_a_version_2_file_with_data_keeps_everything_and_adds_asks(
        tmp_path, monkeypatch):
    """A version 2 file with data keeps everything and gains asks.

    A file written at version 2 (the store's own write path, migrations stopped at 2), opened by
    this version: events, snapshot and sequences as they were, asks usable.
    """
    import functools

    from helpaware_node.store import AskEvent, sqlite as sqlite_module
    with monkeypatch.context() as m:
        m.setattr(sqlite_module, "migrate", functools.partial(schema.migrate, target=2))
        old = make_store(tmp_path)
        keys = [old.key_for(f"porter-{i}") for i in range(3)]
        events = [StoredEvent(old.next_event_id(), keys[i % 3], 60.0 * i, list(Result)[i % 4],
                              (i % 5) / 5, 0.1 * i) for i in range(12)]
        for e in events:
            assert old.append(e)
        old.close()
    conn = sqlite3.connect(tmp_path / "b.sqlite3")
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 2
    snapshot_v2 = conn.execute("SELECT person_key, a, b, last_time_s FROM snapshot").fetchall()
    assert conn.execute("SELECT name FROM sqlite_master WHERE name = 'asks'").fetchone() is None
    conn.close()

    store = make_store(tmp_path)
    assert store.counts()["schema_version"] == 4 and store.counts()["events"] == 12
    for key, a, b, last in snapshot_v2:         # the cached folds untouched, bit for bit
        assert store.belief(key) == (Belief(a, b), last) == refold(events, key)
    assert store.next_event_id() == "r1/13"     # the sequence goes on: no id reused
    ask = AskEvent("r1/14", keys[0], 900.0, "door", "n-1")
    assert store.append_asks([ask]) == [ask]
    store.close()
    again = make_store(tmp_path)
    assert again.asks(person_key=keys[0]) == [ask] and again.next_event_id() == "r1/15"
    with sqlite3.connect(tmp_path / "b.sqlite3") as c:
        assert c.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


def test_newer_schema_is_refused(tmp_path):
    store = make_store(tmp_path)
    store.close()
    conn = sqlite3.connect(tmp_path / "b.sqlite3")
    conn.execute("PRAGMA user_version = 99")
    conn.close()
    with pytest.raises(schema.StoreVersionError, match="newer"):
        make_store(tmp_path)


def test_other_site_key_is_refused_and_file_untouched(tmp_path):
    store = make_store(tmp_path)
    store.append(StoredEvent("r1/1", store.key_for("x"), 1.0, Result.HELPED, 0.1, 0.0))
    store.close()
    size = os.path.getsize(tmp_path / "b.sqlite3")
    with pytest.raises(SiteKeyError, match="different site key"):
        make_store(tmp_path, key=b"t" * 32)
    assert os.path.getsize(tmp_path / "b.sqlite3") == size
    assert make_store(tmp_path).counts()["events"] == 1


def test_key_file_created_owner_only_and_unsafe_file_refused(tmp_path):
    path = tmp_path / "keys" / "site_key"
    key = load_site_key(path)
    assert len(key) == 32 and key == key.strip()
    assert os.stat(path).st_mode & 0o777 == 0o600
    assert load_site_key(path) == key
    os.chmod(path, 0o644)
    with pytest.raises(SiteKeyError) as err:
        load_site_key(path)
    assert str(path) in str(err.value) and f"chmod 600 {path}" in str(err.value)


def test_open_store_uses_sqlite_for_a_path_and_memory_otherwise(tmp_path):
    store = open_store(str(tmp_path / "b.sqlite3"), "r7")
    assert isinstance(store, SqliteStore) and (tmp_path / "site_key").exists()
    assert store.next_event_id() == "r7/1"
    assert type(open_store("")).__name__ == "MemoryStore"


@pytest.mark.parametrize("damage", ["garbage", "truncated", "zeroed_pages"])
def test_damaged_file_is_moved_aside_and_store_starts_on_priors(tmp_path, damage):
    store = make_store(tmp_path)
    k = store.key_for("nurse-a")
    store.extend(StoredEvent(f"r1/{i}", store.key_for(f"n{i}"), float(i), Result.HELPED,
                             0.2, 0.0) for i in range(400))
    store.append(StoredEvent("r1/999", k, 1.0, Result.HELPED, 0.2, 0.0))
    store.close()
    path = tmp_path / "b.sqlite3"
    data = path.read_bytes()
    if damage == "garbage":
        path.write_bytes(b"this is not a database" * 100)
    elif damage == "truncated":
        path.write_bytes(data[: len(data) // 3])
    else:
        path.write_bytes(data[:8192] + b"\x00" * (len(data) - 8192))
    bad = path.read_bytes()
    again = make_store(tmp_path)
    assert again.health.level == "ERROR" and "moved aside" in again.health.message
    assert again.belief(k) == (Belief.prior(MODEL), None)
    aside = [p for p in os.listdir(tmp_path) if ".corrupt-" in p]
    assert aside and (tmp_path / aside[0]).read_bytes() == bad   # kept, byte for byte
    assert again.append(StoredEvent("r1/1000", k, 2.0, Result.HELPED, 0.2, 0.0))  # keeps working
    again.close()
    assert make_store(tmp_path).health.level == "OK"


def test_all_beliefs_in_one_query_match_each_belief(tmp_path):
    store = make_store(tmp_path)
    for i in range(30):
        store.append(StoredEvent(f"r1/{i}", store.key_for(f"p{i % 4}"), float(i * 13 % 7),
                                 list(Result)[i % 4], 0.5, 0.1))
    everyone = store.beliefs()
    assert set(everyone) == set(store.keys()) and len(everyone) == 4
    assert all(everyone[k] == store.belief(k) for k in everyone)


def test_a_refold_that_fails_at_a_read_leaves_no_transaction_open(tmp_path, monkeypatch):
    """The refresh of a snapshot cached under another model rolls back when the refold fails.

    Before, its BEGIN IMMEDIATE stayed open, and every later write on the connection failed
    ("cannot start a transaction within a transaction").
    """
    store = make_store(tmp_path)
    key = store.key_for("porter-1")
    assert store.append(StoredEvent(store.next_event_id(), key, 10.0, Result.HELPED, 0.1, 0.0))
    store.use_model(SiteModel(prior_a=3.0, evidence_half_life_s=7200.0))   # snapshot is stale

    def broken(c, k):
        c.execute("UPDATE snapshot SET a = -1 WHERE person_key = ?", (k,))
        raise sqlite3.OperationalError("disk I/O error")
    monkeypatch.setattr(store, "_refold", broken)
    with pytest.raises(sqlite3.OperationalError):
        store.belief(key)
    assert not store._conn.in_transaction
    monkeypatch.undo()
    # the half-done write was rolled back, and the store writes again
    assert store.append(StoredEvent(store.next_event_id(), key, 20.0, Result.DECLINED, 0.2, 0.0))
    model = SiteModel(prior_a=3.0, evidence_half_life_s=7200.0)
    assert store.belief(key) == fold_events(
        [e.to_outcome() for e in store.events_for(key)], model)
    store.close()

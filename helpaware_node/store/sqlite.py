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

"""The SQLite store: a durable, append-only outcome log with a per-person fold cache.

The log of asks the hard limits count.

- `events` is the source of truth; `snapshot` caches each person's fold
  (core.person.fold_events in (time, event id) order) and is updated in the same
  transaction as the event, so the two never disagree.
- WAL mode, synchronous=FULL, one transaction per outcome: when append() returns the
  outcome survives a crash or power loss.  append_many() stores a batch (fleet catch-up) in
  one such transaction.
- secure_delete is on (on every connection that writes), forget() checkpoints the WAL with
  TRUNCATE and then searches the file's bytes for the key, rebuilding the indexes (or the
  whole file) if a copy is found, so erased rows linger in no page, free or not, nor the log.
- Opt-outs are held in memory too (the decision path reads them per candidate), and a
  forget begun is in force in memory at once; the rows of a forget, an opt-out or a
  compaction can be written on a worker thread's own connection (store/jobs.py).
- `asks` holds every ask (own, and peers' from the fleet), one durable transaction each,
  written before the decision is published; it never changes a belief.
- A damaged file is moved aside (never deleted) and the store starts on priors with
  health ERROR, so the robot keeps working and diagnostics say what happened.
"""
from __future__ import annotations

import contextlib
from dataclasses import dataclass
import datetime
import hashlib
import json
import math
import os
from pathlib import Path
import sqlite3
import threading
import time
from typing import Any, Iterable, Iterator, Optional, Sequence

from .base import AskEvent, check_learned, LearnedEntry, person_key, StoredEvent, StoreHealth
from .ids import check_ask, check_event, check_robot_id, PERSON_KEY_RE  # noqa: F401 (re-exported)
from .keys import key_fingerprint, SiteKeyError, SiteKeys
from .schema import file_version, migrate, StoreVersionError
from ..core import Belief, fold_events, OutcomeEvent, Result, SiteModel
from ..core.model import CoreInputError, from_plain, MAX_ASKS_CAP, to_plain
from ..core.person import fold_next

DAY_S = 86400.0
EVENT_COLUMNS = "event_id, person_key, time_s, busyness, ask_load, result, request_kind"
ASK_COLUMNS = "event_id, robot_id, person_key, time_s, request_kind, request_id"
INSERT_EVENT = f"INSERT OR IGNORE INTO events ({EVENT_COLUMNS}) VALUES (?,?,?,?,?,?,?)"
UPSERT_SEQUENCE = ("INSERT INTO sequences VALUES (?, ?) ON CONFLICT(robot_id) DO UPDATE "
                   "SET next_seq = max(next_seq, excluded.next_seq)")
SQLITE_HEADER = b"SQLite format 3\x00"
SCAN_CHUNK_BYTES = 1 << 20     # forget's search of the file, per read
ASKS_PER_COMMIT = 500          # a worker's compaction deletes old asks this many at a time


def set_pragmas(conn: sqlite3.Connection) -> None:
    """Set the per-connection settings every writer of the file uses (the node's, a worker's).

    a commit is on disk when it returns, and deleted rows are zeroed, not left in free space.
    """
    conn.execute("PRAGMA synchronous=FULL")
    conn.execute("PRAGMA secure_delete=ON")


class StoreCorruptError(RuntimeError):
    """The file is not a readable store (damaged, truncated, or not SQLite)."""


def model_hash(model: SiteModel) -> str:
    text = json.dumps(to_plain(model), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def row_to_ask(row: Sequence[Any]) -> AskEvent:
    return AskEvent(row[0], row[2], row[3], row[4], row[5])


def row_to_event(row: Sequence[Any]) -> StoredEvent:
    return StoredEvent(row[0], row[1], row[2], Result(row[5]), row[3], row[4], row[6])


def event_to_row(e: StoredEvent) -> tuple[Any, ...]:
    result = e.result.value if isinstance(e.result, Result) else Result.parse(e.result).value
    return (e.event_id, e.person_key, float(e.time_s), float(e.busyness), float(e.ask_load),
            result, e.request_kind or "")


def utc_stamp() -> str:
    return datetime.datetime.now(datetime.timezone.utc).strftime("%Y%m%dT%H%M%SZ")


def move_aside(path: Path) -> Path:
    """Rename the file and its -wal/-shm companions to '<name>.corrupt-<UTC time>[-wal]'."""
    stamp = utc_stamp()
    target = path.with_name(f"{path.name}.corrupt-{stamp}")
    n = 1
    while target.exists():
        n += 1
        target = path.with_name(f"{path.name}.corrupt-{stamp}-{n}")
    for suffix in ("", "-wal", "-shm", "-journal"):
        src = Path(str(path) + suffix)
        if src.exists():
            os.replace(src, Path(str(target) + suffix))
    return target


@dataclass(frozen=True)
class SqliteReader:
    """Reads a store file's outcomes and asks for site learning (picklable: a path)."""

    path: str

    def __call__(self) -> tuple[list[StoredEvent], list[AskEvent]]:
        conn = sqlite3.connect(f"file:{self.path}?mode=ro", uri=True, timeout=10.0)
        try:
            conn.execute("BEGIN")      # one snapshot of both tables
            not_opted = "person_key NOT IN (SELECT person_key FROM opt_out)"
            outcomes = [row_to_event(r) for r in conn.execute(
                f"SELECT {EVENT_COLUMNS} FROM events WHERE {not_opted}")]
            asks = [row_to_ask(r) for r in conn.execute(
                f"SELECT {ASK_COLUMNS} FROM asks WHERE {not_opted}")]
            conn.execute("COMMIT")
            return outcomes, asks
        finally:
            conn.close()


class SqliteStore:
    """BeliefStore on one SQLite file (see the module doc and docs/store.md)."""

    def __init__(self, path: str | os.PathLike[str], robot_id: str, site_key: bytes | SiteKeys,
                 model: SiteModel | None = None, retention_days: float = 0.0,
                 integrity_check: bool = True) -> None:
        check_robot_id(robot_id)
        self.path = Path(path)
        self.robot_id = robot_id
        self._given_model = model
        self._set_model(model or SiteModel())
        # the site key file's keys: person ids are hashed with person_id_key; the fleet link
        # derives its signing keys from the rest (signing.py)
        self.site_keys = site_key if isinstance(site_key, SiteKeys) else SiteKeys.single(site_key)
        site_key = self.site_keys.person_id_key
        self._site_key = site_key
        self._fingerprint = key_fingerprint(site_key)
        self._lock = threading.RLock()
        # held by every write transaction of this process's connections (the node's, the
        # worker's): an append waiting for a worker's short transaction wakes when it ends,
        # instead of SQLite's busy handler sleeping 1, 2, 5, 10 ... ms between tries
        self._write_gate = threading.Lock()
        self.health = StoreHealth("OK", f"store {self.path}")
        self.moved_aside: Path | None = None
        self.path.parent.mkdir(parents=True, exist_ok=True, mode=0o700)
        try:
            self._conn = self._open_checked(integrity_check)
        except StoreCorruptError as exc:
            self.moved_aside = move_aside(self.path)
            self._conn = self._open_checked(integrity_check=False)
            self.health = StoreHealth(
                "ERROR", f"damaged store moved aside to {self.moved_aside}; started on priors "
                f"(cause: {str(exc)[:80]})")
        self._next_seq = self._load_next_seq()
        # opt-outs in memory: the decision path asks for every candidate, and SQL there costs
        # a query per candidate per decision; kept equal to the table by every write below
        self._opted: set[str] = {r[0] for r in self._conn.execute(
            "SELECT person_key FROM opt_out")}
        # forgets begun (their rows go on a worker's connection, store/jobs.py): the person
        # is unknown to every read at once
        self._forgetting: set[str] = set()
        # retention at open: on a big store a compaction takes seconds, so it is not run here;
        # a worker takes it (StoreJobs does at once, store/jobs.py), or the caller runs
        # run_retention(). Until it has run, events_for() and asks() leave out what it deletes
        # (beliefs are the same either way: the compacted base is the fold of the prefix)
        self.retention_s = retention_days * DAY_S if retention_days > 0 else 0.0
        self._retention_cutoff_s: float | None = (
            time.time() - self.retention_s if self.retention_s > 0 else None)

    # -- opening -----------------------------------------------------------------------
    def _open_checked(self, integrity_check: bool) -> sqlite3.Connection:
        existed = self.path.exists() and self.path.stat().st_size > 0
        if existed:
            with open(self.path, "rb") as fh:
                if fh.read(16) != SQLITE_HEADER:
                    raise StoreCorruptError("not an SQLite file")
        conn = None
        try:
            old_umask = os.umask(0o077)     # db, -wal and -shm owner-only
            try:
                conn = sqlite3.connect(str(self.path), isolation_level=None,
                                       check_same_thread=False, timeout=10.0)
                mode = conn.execute("PRAGMA journal_mode=WAL").fetchone()[0]
            finally:
                os.umask(old_umask)
            if str(mode).lower() != "wal":
                raise StoreCorruptError(f"cannot switch to WAL mode (got {mode})")
            set_pragmas(conn)
            if existed and integrity_check:
                problems = [r[0] for r in conn.execute("PRAGMA quick_check(5)")]
                if problems != ["ok"]:
                    raise StoreCorruptError("; ".join(problems)[:300])
            version_before = file_version(conn)
            applied = migrate(conn)
            self._check_meta(conn)
            if applied and version_before >= 1 and 2 in applied:
                self._rebuild_all(conn)
            return conn
        except StoreVersionError:
            if conn is not None:
                conn.close()
            raise
        except SiteKeyError:
            if conn is not None:
                conn.close()
            raise
        except sqlite3.DatabaseError as exc:
            if conn is not None:
                conn.close()
            raise StoreCorruptError(str(exc)) from None
        except StoreCorruptError:
            if conn is not None:
                conn.close()
            raise

    def _check_meta(self, conn: sqlite3.Connection) -> None:
        rows = dict(conn.execute("SELECT name, value FROM meta"))
        stored = rows.get("key_fingerprint")
        if stored is None:
            conn.execute("INSERT INTO meta VALUES ('key_fingerprint', ?)", (self._fingerprint,))
            conn.execute("INSERT OR IGNORE INTO meta VALUES ('created_utc', ?)", (utc_stamp(),))
        elif stored != self._fingerprint:
            raise SiteKeyError(
                f"store file {self.path} was made with a different site key (fingerprint "
                f"{stored[:12]}..., this key {self._fingerprint[:12]}...). Give the key file "
                "that created it, or a new store path; the file was left untouched")
        # the snapshot is cached under one site model: the node records it, tools reuse it
        if self._given_model is not None:
            conn.execute("INSERT OR REPLACE INTO meta VALUES ('site_model', ?)",
                         (json.dumps(to_plain(self.model), sort_keys=True),))
        elif "site_model" in rows:
            self._set_model(from_plain(SiteModel, json.loads(rows["site_model"])))

    def _set_model(self, model: SiteModel) -> None:
        self.model = model
        self._model_hash = model_hash(model)
        self._prior = Belief.prior(model)      # built once: append folds one outcome in

    def _load_next_seq(self) -> int:
        row = self._conn.execute("SELECT next_seq FROM sequences WHERE robot_id = ?",
                                 (self.robot_id,)).fetchone()
        return int(row[0]) if row else 1

    # -- BeliefStore -------------------------------------------------------------------
    def key_for(self, raw_id: str) -> str:
        return person_key(self._site_key, raw_id)

    def next_event_id(self) -> str:
        """Return a new event id for this robot; never reused, even after restarts or forget."""
        with self._lock:
            seq = self._next_seq
            self._next_seq += 1
            return f"{self.robot_id}/{seq}"

    def append(self, event: StoredEvent) -> bool:
        """Store one outcome durably before returning.

        False when nothing was stored: a duplicate event id, an opted-out person (or one
        being forgotten), or an event older than the person's compacted history.
        """
        outcome = check_event(event)
        row = event_to_row(event)
        if event.person_key in self._opted or event.person_key in self._forgetting:
            return False        # in memory: no SQL for it (the table says the same)
        with self._lock, self._write_gate:
            c = self._conn
            c.execute("BEGIN IMMEDIATE")
            try:
                stored = self._append_in_tx(event, row, outcome=outcome)
                if not stored:
                    c.execute("ROLLBACK")
                    return False
                c.execute("COMMIT")
                return True
            except BaseException:
                if c.in_transaction:
                    c.execute("ROLLBACK")
                raise

    def _append_in_tx(self, event: StoredEvent, row: tuple[Any, ...],
                      refold_later: set[str] | None = None,
                      outcome: Optional[OutcomeEvent] = None) -> bool:
        """Insert one event inside the open transaction and keep its snapshot the fold.

        With `refold_later` (a batch), a person whose event arrives out of order is refolded
        once at the end of the batch instead of at every such event.
        """
        c = self._conn
        key = event.person_key
        if key in self._opted or key in self._forgetting:
            return False
        snap = c.execute("SELECT a, b, last_time_s, last_event_id, row_id, model_hash, "
                         "base_time_s, base_event_id FROM snapshot WHERE person_key = ?",
                         (key,)).fetchone()
        order = (float(event.time_s), event.event_id)
        if snap is not None and snap[6] is not None and order <= (snap[6], snap[7]):
            return False        # older than the compacted base: cannot be folded in order
        if c.execute(INSERT_EVENT, row).rowcount == 0:
            return False
        if refold_later is not None and key in refold_later:
            pass                # refolded once when the batch ends
        elif (snap is not None and snap[5] == self._model_hash and snap[2] is not None
                and order > (snap[2], snap[3])):
            # the next step of the fold (core.person.fold_next, as fold_events takes it); the
            # row found again by its id, the key index walked once per append
            belief, last = fold_next(Belief(snap[0], snap[1]), snap[2],
                                     outcome or event.to_outcome(), self.model, self._prior)
            c.execute("UPDATE snapshot SET a = ?, b = ?, last_time_s = ?, last_event_id = ?, "
                      "event_count = event_count + 1 WHERE row_id = ?",
                      (belief.a, belief.b, last, event.event_id, snap[4]))
        elif snap is None:
            belief, last = fold_events([outcome or event.to_outcome()], self.model)
            c.execute("INSERT INTO snapshot (person_key, a, b, last_time_s, last_event_id, "
                      "event_count, model_hash) VALUES (?,?,?,?,?,1,?)",
                      (key, belief.a, belief.b, last, event.event_id, self._model_hash))
        elif refold_later is not None:
            refold_later.add(key)
        else:                   # arrived out of order (fleet) or cached under another model
            self._refold(c, key)
        self._note_own_sequence(c, event.event_id)
        return True

    def extend(self, events: Iterable[StoredEvent]) -> int:
        return len(self.append_many(events))

    def append_many(self, events: Iterable[StoredEvent]) -> list[StoredEvent]:
        """Store a batch durably in ONE transaction; returns the events that were stored.

        Sorted by (time, event id) first, so most events extend their person's fold; a person
        whose events still arrive behind what is stored is refolded once per batch.  All or
        nothing: a malformed event refuses the whole batch (CoreInputError names the field),
        and nothing is stored when the commit fails.  Skipped like append(): duplicates (also
        within the batch), opted-out people, events older than a compacted base.
        """
        batch = sorted(events, key=lambda e: (float(e.time_s), e.event_id))
        rows: list[tuple[Any, ...]] = []
        outcomes: list[OutcomeEvent] = []
        for e in batch:
            outcomes.append(check_event(e))
            rows.append(event_to_row(e))
        if not batch:
            return []
        with self._batch() as c:
            refold_later: set[str] = set()
            stored = [e for e, row, o in zip(batch, rows, outcomes)
                      if self._append_in_tx(e, row, refold_later, o)]
            for key in refold_later:
                self._refold(c, key)
            return stored

    @contextlib.contextmanager
    def _batch(self) -> Iterator[sqlite3.Connection]:
        """One durable transaction for a batch: all of it, or nothing and the sequence back."""
        with self._lock, self._write_gate:
            c = self._conn
            next_seq = self._next_seq
            c.execute("BEGIN IMMEDIATE")
            try:
                yield c
                c.execute("COMMIT")
            except BaseException:
                if c.in_transaction:
                    c.execute("ROLLBACK")
                self._next_seq = next_seq       # nothing of the batch was stored
                raise

    def _events(self, c: sqlite3.Connection, key: str) -> list[StoredEvent]:
        return [row_to_event(r) for r in c.execute(
            f"SELECT {EVENT_COLUMNS} FROM events WHERE person_key = ? ORDER BY time_s, event_id",
            (key,))]

    def _fold(self, c: sqlite3.Connection, key: str,
              model: SiteModel) -> tuple[Belief, Optional[float], Optional[str], int]:
        """(belief, last time, last event id, count) refolded from the base and the events."""
        base = c.execute("SELECT base_a, base_b, base_time_s, base_event_id, base_count "
                         "FROM snapshot WHERE person_key = ?", (key,)).fetchone()
        events = self._events(c, key)
        start, start_t, start_id, count = None, None, None, 0
        if base is not None and base[0] is not None:
            start, start_t, start_id, count = Belief(base[0], base[1]), base[2], base[3], base[4]
        belief, last = fold_events([e.to_outcome() for e in events], model, start, start_t)
        last_id = max(((e.time_s, e.event_id) for e in events), default=(None, start_id))[1]
        return belief, last, last_id, count + len(events)

    def _refold(self, c: sqlite3.Connection, key: str) -> None:
        belief, last, last_id, count = self._fold(c, key, self.model)
        c.execute("INSERT INTO snapshot (person_key, a, b, last_time_s, last_event_id, "
                  "event_count, model_hash) VALUES (?,?,?,?,?,?,?) ON CONFLICT(person_key) DO "
                  "UPDATE SET a = excluded.a, b = excluded.b, last_time_s = excluded.last_time_s,"
                  " last_event_id = excluded.last_event_id, event_count = excluded.event_count,"
                  " model_hash = excluded.model_hash",
                  (key, belief.a, belief.b, last, last_id, count, self._model_hash))

    def _rebuild_all(self, conn: sqlite3.Connection) -> None:
        conn.execute("BEGIN IMMEDIATE")
        try:
            for (key,) in conn.execute("SELECT DISTINCT person_key FROM events").fetchall():
                self._refold(conn, key)
            conn.execute("COMMIT")
        except BaseException:
            conn.execute("ROLLBACK")
            raise

    def events_for(self, key: str) -> list[StoredEvent]:
        if key in self._forgetting:
            return []
        with self._lock:
            events = self._events(self._conn, key)
        cutoff = self._retention_cutoff_s
        return events if cutoff is None else [e for e in events if e.time_s >= cutoff]

    def keys(self) -> list[str]:
        with self._lock:
            keys = [r[0] for r in self._conn.execute(
                "SELECT person_key FROM snapshot ORDER BY person_key")]
        return [k for k in keys if k not in self._forgetting] if self._forgetting else keys

    def belief(self, key: str, model: SiteModel | None = None) -> tuple[Belief, float | None]:
        """Return the cached fold under the store's model; any other model refolds (not cached)."""
        model = model or self.model
        if key in self._forgetting:     # erased at once, whatever the worker has done yet
            return Belief.prior(model), None
        with self._lock:
            c = self._conn
            if model_hash(model) != self._model_hash:
                belief, last, _, _ = self._fold(c, key, model)
                return belief, last
            snap = c.execute("SELECT a, b, last_time_s, model_hash FROM snapshot "
                             "WHERE person_key = ?", (key,)).fetchone()
            if snap is None:
                return Belief.prior(model), None
            if snap[3] != self._model_hash:     # cached under an older model: refresh
                with self._batch() as tx:       # a failed refold rolls back, never left open
                    self._refold(tx, key)
                snap = c.execute("SELECT a, b, last_time_s FROM snapshot WHERE person_key = ?",
                                 (key,)).fetchone()
            return Belief(snap[0], snap[1]), snap[2]

    def beliefs(self) -> dict[str, tuple[Belief, float | None]]:
        """Every known person's belief under the store's model, in one query (start-up)."""
        with self._lock:
            rows = self._conn.execute("SELECT person_key, a, b, last_time_s, model_hash "
                                      "FROM snapshot").fetchall()
        out = {}
        for key, a, b, last, mh in rows:
            if key not in self._forgetting:
                out[key] = (Belief(a, b), last) if mh == self._model_hash else self.belief(key)
        return out

    def is_opted_out(self, key: str) -> bool:
        """From memory (loaded at open, kept by every opt-out and forget).

        No SQL on the decision path.
        """
        return key in self._opted

    def opt_out(self, key: str) -> None:
        """No more learning about this person (their existing events stay until forget)."""
        self.begin_opt_out(key)
        with self._lock:
            self.opt_out_rows(self._conn, key)

    def begin_opt_out(self, key: str) -> None:
        """Put the opt-out in memory, in force for every decision and append from now on.

        Its row is written by opt_out_rows (here, or on a worker's connection: store/jobs.py).
        """
        if not PERSON_KEY_RE.match(key or ""):
            raise CoreInputError("person_key: expected 64 lowercase hex digits")
        self._opted.add(key)

    def opt_out_rows(self, c: sqlite3.Connection, key: str) -> None:
        with self._write_gate:
            c.execute("INSERT OR IGNORE INTO opt_out (person_key, since_s) VALUES (?, ?)",
                      (key, time.time()))

    def opted_out(self) -> list[str]:
        return sorted(self._opted)

    def forget(self, key: str) -> int:
        """Delete every row that holds the key (asks too) and leave no copy of it.

        Delete every row that holds the key (asks too) and leave no copy of it in the file or the
        WAL (see forget_rows).  Returns the events removed, compacted ones included.
        """
        self.begin_forget(key)
        try:
            with self._lock:
                return self.forget_rows(self._conn, key)
        finally:
            self.end_forget(key)

    def begin_forget(self, key: str) -> None:
        """Make the person unknown from now on.

        Reads give the prior, appends are refused, the opt-out entry goes (as forget deletes it),
        until end_forget after forget_rows.
        """
        if not PERSON_KEY_RE.match(key or ""):
            raise CoreInputError("person_key: expected 64 lowercase hex digits")
        self._forgetting.add(key)
        self._opted.discard(key)

    def end_forget(self, key: str) -> None:
        self._forgetting.discard(key)

    def forget_rows(self, c: sqlite3.Connection, key: str) -> int:
        """Delete the key's rows on connection `c`, checkpoint the WAL away.

        Then search the file's bytes for the key: a copy can outlive the rows as a divider in an
        interior index page, so a find rebuilds the indexes, and one still found after that
        rewrites the whole file (VACUUM).  A key never stored costs one small transaction.
        """
        with self._write_gate:
            c.execute("BEGIN IMMEDIATE")
            try:
                row = c.execute("SELECT base_count FROM snapshot WHERE person_key = ?",
                                (key,)).fetchone()
                n = row[0] if row else 0       # compacted events count as removed too
                n += c.execute("DELETE FROM events WHERE person_key = ?", (key,)).rowcount
                rows = n + sum(c.execute(f"DELETE FROM {table} WHERE person_key = ?",
                                         (key,)).rowcount
                               for table in ("asks", "snapshot", "opt_out"))
                c.execute("COMMIT")
            except BaseException:
                if c.in_transaction:
                    c.execute("ROLLBACK")
                raise
        if rows:
            self.erase_copies(c, key)
        return n

    def erase_copies(self, c: sqlite3.Connection, key: str) -> str:
        """Make sure no byte of `key` is left in the file or its WAL.

        Returns what it took ("none", "reindex", "vacuum"; "left" when a copy remained, health then
        ERROR).
        """
        needle = key.encode()
        self.checkpoint(c)
        if not self.file_holds(needle):
            return "none"
        c.execute("BEGIN IMMEDIATE")
        try:
            for index in ("events_by_person", "asks_by_person", "snapshot", "opt_out"):
                c.execute(f"REINDEX {index}")
            c.execute("COMMIT")
        except BaseException:
            if c.in_transaction:
                c.execute("ROLLBACK")
            raise
        self.checkpoint(c)
        if not self.file_holds(needle):
            return "reindex"
        c.execute("VACUUM")
        self.checkpoint(c)
        if not self.file_holds(needle):
            return "vacuum"
        self.health = StoreHealth("ERROR", f"store {self.path}: a forgotten key is still in "
                                  "the file (a reader held the WAL?); forget it again")
        return "left"

    def file_holds(self, needle: bytes) -> bool:
        """Whether the database file or its WAL holds these bytes anywhere (free pages too).

        Read in chunks: each read lets go of the interpreter, so a scan of a large file on a
        worker does not hold the executor's thread for its length.
        """
        overlap = len(needle) - 1
        for suffix in ("", "-wal"):
            try:
                fh = open(str(self.path) + suffix, "rb", buffering=0)
            except FileNotFoundError:
                continue
            with fh:
                tail = b""
                while True:
                    chunk = fh.read(SCAN_CHUNK_BYTES)
                    if not chunk:
                        break
                    if needle in tail + chunk[:overlap] or needle in chunk:
                        return True
                    tail = chunk[-overlap:] if overlap else b""
        return False

    def checkpoint(self, c: sqlite3.Connection | None = None) -> None:
        """Copy the WAL into the file and empty it (no erased row lingers in the log).

        A TRUNCATE checkpoint holds the write lock while it copies and syncs, so the frames go
        first by a PASSIVE one, which lets appends commit meanwhile; the TRUNCATE then has the
        few frames written since.
        """
        c = self._conn if c is None else c
        c.execute("PRAGMA wal_checkpoint(PASSIVE)").fetchone()
        with self._write_gate:
            busy, _, _ = c.execute("PRAGMA wal_checkpoint(TRUNCATE)").fetchone()
        if busy:
            self.health = StoreHealth("ERROR", f"store {self.path}: WAL checkpoint blocked by "
                                      "another reader; erased rows may remain in the WAL")

    def run_retention(self) -> int:
        """Run the retention given at open, in the caller (no worker); events removed."""
        if not self.retention_s:
            return 0
        n = self.compact(self.retention_s)
        self.end_retention()
        return n

    def end_retention(self) -> None:
        """Note that the retention given at open has run (or failed: reads show the file again)."""
        self._retention_cutoff_s = None

    def compact(self, older_than_s: float, now_s: float | None = None) -> int:
        """Fold events older than `older_than_s` into each person's base and delete them.

        Asks older than that go too (they carry no evidence).

        Beliefs do not change: the fold is sequential, and the base is exactly the fold of
        the deleted prefix.  Returns the number of events removed.  A retention shorter than
        the longest limit window (a day, or min_reask_interval_s) shortens what the limits
        see after a restart: docs/store.md.
        """
        with self._lock:
            return self.compact_rows(self._conn, older_than_s, now_s)

    def compact_rows(self, c: sqlite3.Connection, older_than_s: float,
                     now_s: float | None = None, keys_per_commit: int = 0,
                     pause_s: float = 0.0, max_tx_s: float = 0.0) -> int:
        """compact() on connection `c`.

        With `keys_per_commit` > 0 (a worker) one transaction per that many people at most, and
        with `max_tx_s` > 0 one that ends once it has taken that long (the person begun is
        finished: each person's base and deletion commit together), so the node's appends wait
        for one short transaction at most; old asks go `ASKS_PER_COMMIT` at a time.
        """
        if older_than_s < 0:
            raise CoreInputError(f"older_than_s: {older_than_s!r} must be >= 0")
        cutoff = (time.time() if now_s is None else now_s) - older_than_s
        removed = asks_removed = 0
        keys = [r[0] for r in c.execute(
            "SELECT DISTINCT person_key FROM events WHERE time_s < ?", (cutoff,))]
        worker = keys_per_commit > 0
        per_commit = keys_per_commit if worker else max(len(keys), 1)
        at = 0
        asks_left = True
        while at < len(keys) or asks_left:
            with self._write_gate:
                c.execute("BEGIN IMMEDIATE")
                try:
                    t0 = time.perf_counter()
                    end = min(at + per_commit, len(keys))
                    while at < end:
                        key = keys[at]
                        at += 1
                        if key not in self._forgetting:
                            removed += self._compact_key(c, key, cutoff)
                        if max_tx_s > 0 and time.perf_counter() - t0 >= max_tx_s:
                            break
                    if at >= len(keys) and worker:    # then the asks, a batch at a time
                        n = c.execute("DELETE FROM asks WHERE row_id IN (SELECT row_id FROM "
                                      "asks WHERE time_s < ? LIMIT ?)",
                                      (cutoff, ASKS_PER_COMMIT)).rowcount
                        asks_removed += n
                        asks_left = n == ASKS_PER_COMMIT
                    elif at >= len(keys):
                        asks_removed += c.execute("DELETE FROM asks WHERE time_s < ?",
                                                  (cutoff,)).rowcount
                        asks_left = False
                    c.execute("COMMIT")
                except BaseException:
                    if c.in_transaction:
                        c.execute("ROLLBACK")
                    raise
            if worker:      # the batch's frames into the file, the gate open (see below)
                c.execute("PRAGMA wal_checkpoint(PASSIVE)").fetchone()
                time.sleep(pause_s)     # room for the node's callbacks and appends
        if removed or asks_removed:
            self.checkpoint(c)
        return removed

    def worker_connection(self) -> sqlite3.Connection:
        """Return a connection of its own for a worker thread (store/jobs.py).

        Set like the node's.
        """
        conn = sqlite3.connect(str(self.path), isolation_level=None, check_same_thread=False,
                               timeout=10.0)
        set_pragmas(conn)
        # SQLite checkpoints the WAL inside the COMMIT that takes it past 1000 pages: on the
        # worker that would be inside the write gate, an append waiting for a whole checkpoint.
        # The worker checkpoints after its commits instead (compact_rows, checkpoint()).
        conn.execute("PRAGMA wal_autocheckpoint=0")
        return conn

    def _compact_key(self, c: sqlite3.Connection, key: str, cutoff: float) -> int:
        snap = c.execute("SELECT model_hash FROM snapshot WHERE person_key = ?",
                         (key,)).fetchone()
        if snap is None or snap[0] != self._model_hash:
            self._refold(c, key)
        base = c.execute("SELECT base_a, base_b, base_time_s, base_event_id, base_count "
                         "FROM snapshot WHERE person_key = ?", (key,)).fetchone()
        old = [row_to_event(r) for r in c.execute(
            f"SELECT {EVENT_COLUMNS} FROM events WHERE person_key = ? AND time_s < ? "
            "ORDER BY time_s, event_id", (key, cutoff))]
        start = Belief(base[0], base[1]) if base[0] is not None else None
        belief, last = fold_events([e.to_outcome() for e in old], self.model, start, base[2])
        last_id = old[-1].event_id
        c.execute("UPDATE snapshot SET base_a = ?, base_b = ?, base_time_s = ?, "
                  "base_event_id = ?, base_count = ? WHERE person_key = ?",
                  (belief.a, belief.b, last, last_id, base[4] + len(old), key))
        c.execute("DELETE FROM events WHERE person_key = ? AND time_s < ?", (key, cutoff))
        return len(old)

    # -- admin -------------------------------------------------------------------------
    def counts(self) -> dict[str, int | str]:
        with self._lock:
            def q(sql: str) -> int:
                return int(self._conn.execute(sql).fetchone()[0])

            return {
                "schema_version": file_version(self._conn),
                "events": q("SELECT count(*) FROM events"),
                "persons": q("SELECT count(*) FROM snapshot"),
                "compacted_events": q("SELECT coalesce(sum(base_count), 0) FROM snapshot"),
                "opted_out": q("SELECT count(*) FROM opt_out"),
                "asks": q("SELECT count(*) FROM asks"),
                "learned_revisions": q("SELECT count(*) FROM learned_constants"),
                "robots": len(self.robot_ids()),
            }

    def robot_ids(self) -> list[str]:
        with self._lock:
            ids = {r[0] for r in self._conn.execute("SELECT robot_id FROM sequences")}
            ids |= {r[0] for r in self._conn.execute(
                "SELECT DISTINCT substr(event_id, 1, instr(event_id, '/') - 1) FROM events")}
            ids |= {r[0] for r in self._conn.execute("SELECT DISTINCT robot_id FROM asks")}
        return sorted(ids)

    def _in_order(self, table: str, columns: str) -> list[Any]:
        with self._lock:
            return self._conn.execute(f"SELECT {columns} FROM {table} "
                                      "ORDER BY time_s, event_id").fetchall()

    def iter_events(self) -> Iterator[StoredEvent]:
        """Every stored event in (time, event id) order."""
        return (row_to_event(r) for r in self._in_order("events", EVENT_COLUMNS))

    def recent_events(self, limit: int) -> list[StoredEvent]:
        with self._lock:
            rows = self._conn.execute(f"SELECT {EVENT_COLUMNS} FROM events ORDER BY time_s "
                                      "DESC, event_id DESC LIMIT ?", (int(limit),)).fetchall()
        return [row_to_event(r) for r in reversed(rows)]

    # -- asks --------------------------------------------------------------------------
    def append_asks(self, asks: Iterable[AskEvent]) -> list[AskEvent]:
        """Store asks durably in ONE transaction; returns the ones that were new.

        The node's own ask is a batch of one, committed before its decision is published.
        Skipped: a duplicate event id, an opted-out person. All or nothing: a malformed ask
        refuses the batch (CoreInputError names the field).
        """
        batch = sorted(asks, key=lambda a: (float(a.time_s), a.event_id))
        for a in batch:
            check_ask(a)
        batch = [a for a in batch
                 if a.person_key not in self._opted and a.person_key not in self._forgetting]
        if not batch:
            return []
        with self._batch() as c:
            stored = []
            for a in batch:
                cur = c.execute(f"INSERT OR IGNORE INTO asks ({ASK_COLUMNS}) VALUES "
                                "(?,?,?,?,?,?)", (a.event_id, a.robot_id, a.person_key,
                                                  float(a.time_s), a.request_kind,
                                                  a.request_id))
                if cur.rowcount:
                    stored.append(a)
                    self._note_own_sequence(c, a.event_id)
            return stored

    def _note_own_sequence(self, c: sqlite3.Connection, event_id: str) -> None:
        robot, _, seq = event_id.rpartition("/")
        if robot == self.robot_id and seq.isdigit():
            after = int(seq) + 1
            c.execute(UPSERT_SEQUENCE, (robot, after))
            if after > self._next_seq:
                self._next_seq = after

    def asks(self, *, person_key: str | None = None, robot_id: str | None = None,
             request_id: str | None = None, since_s: float | None = None,
             limit: int = MAX_ASKS_CAP) -> list[AskEvent]:
        """Asks matching every filter given (and at or after `since_s`).

        The newest `limit` of them, in (time, event id) order.
        """
        where: list[str] = []
        args: list[str | float] = []
        for column, value in (("person_key", person_key), ("robot_id", robot_id),
                              ("request_id", request_id)):
            if value is not None:
                where.append(f"{column} = ?")
                args.append(value)
        cutoff = self._retention_cutoff_s       # a retention at open not run yet
        if since_s is not None or cutoff is not None:
            where.append("time_s >= ?")
            args.append(max(float(since_s if since_s is not None else -math.inf),
                            cutoff if cutoff is not None else -math.inf))
        # by request id the planner would walk the robot's index (it sorts by time): say which
        hint = " INDEXED BY asks_by_request" if request_id is not None else ""
        sql = (f"SELECT {ASK_COLUMNS} FROM asks{hint}"
               + (" WHERE " + " AND ".join(where) if where else "")
               + " ORDER BY time_s DESC, event_id DESC LIMIT ?")
        if person_key is not None and person_key in self._forgetting:
            return []
        with self._lock:
            rows = self._conn.execute(sql, args + [max(int(limit), 0)]).fetchall()
        return [row_to_ask(r) for r in reversed(rows)
                if not self._forgetting or r[2] not in self._forgetting]

    def move_asks_forward(self, by_s: float) -> int:
        """Move every stored ask forward by a forward jump of the system clock.

        A forward jump of the system clock (seen against the steady clock while the node ran):
        every stored ask moves with it, so after a restart each keeps its real age.
        """
        with self._lock:
            return self._conn.execute("UPDATE asks SET time_s = time_s + ?",
                                      (float(by_s),)).rowcount

    def iter_asks(self) -> Iterator[AskEvent]:
        """Every stored ask in (time, event id) order."""
        return (row_to_ask(r) for r in self._in_order("asks", ASK_COLUMNS))

    def recent_asks(self, limit: int) -> list[AskEvent]:
        return self.asks(limit=limit)

    def bulk_load(self, events: Iterable[StoredEvent]) -> int:
        """Insert many events in one transaction and rebuild their snapshots (imports, bench)."""
        with self._lock:
            c = self._conn
            c.execute("BEGIN IMMEDIATE")
            try:
                before = c.total_changes
                c.executemany(f"INSERT OR IGNORE INTO events ({EVENT_COLUMNS}) VALUES "
                              "(?,?,?,?,?,?,?)", (event_to_row(e) for e in events))
                n = c.total_changes - before
                for (key,) in c.execute("SELECT DISTINCT person_key FROM events").fetchall():
                    self._refold(c, key)
                c.execute("COMMIT")
            except BaseException:
                c.execute("ROLLBACK")
                raise
            return n

    # -- site learning (fit/online.py) -------------------------------------------------
    def event_count(self) -> int:
        with self._lock:
            return int(self._conn.execute("SELECT count(*) FROM events").fetchone()[0])

    def use_model(self, model: SiteModel) -> None:
        """Fold beliefs under `model` from now on (the constants in force changed).

        Nothing is refolded here: each person's snapshot carries the hash of the model it was
        folded under, and belief() refolds a stale one when that person is next read, so a
        change of constants costs the executor nothing on a big store.
        """
        with self._lock:
            if model_hash(model) == self._model_hash:
                return
            self._set_model(model)
            self._conn.execute("INSERT OR REPLACE INTO meta VALUES ('site_model', ?)",
                               (json.dumps(to_plain(model), sort_keys=True),))

    def learning_reader(self) -> "SqliteReader":
        """(outcomes, asks) of people not opted out.

        Read by whoever calls it (a refit's worker thread or process) on its own read-only
        connection: WAL lets it read while the node writes, and the node's connection and lock are
        never held by a refit.
        """
        return SqliteReader(str(self.path))

    def record_learned(self, entry: LearnedEntry) -> None:
        """Keep a revision of the learned constants, durably (one transaction)."""
        check_learned(entry)
        row = (int(entry.revision), float(entry.time_s), entry.recorded_utc or utc_stamp(),
               entry.robot_id or self.robot_id, json.dumps(entry.constants, sort_keys=True),
               json.dumps(entry.target, sort_keys=True), int(entry.n_outcomes),
               json.dumps(entry.verdict, sort_keys=True, allow_nan=False))
        with self._lock:
            try:
                self._conn.execute("INSERT INTO learned_constants (revision, time_s, "
                                   "recorded_utc, robot_id, constants, target, n_outcomes, "
                                   "verdict) VALUES (?,?,?,?,?,?,?,?)", row)
            except sqlite3.IntegrityError:
                raise CoreInputError(f"revision: {entry.revision} is already in the "
                                     "history") from None

    def learned_history(self, limit: int = 1000) -> list[LearnedEntry]:
        """Return the newest `limit` revisions, oldest first."""
        with self._lock:
            rows = self._conn.execute(
                "SELECT revision, time_s, constants, target, n_outcomes, verdict, recorded_utc, "
                "robot_id FROM learned_constants ORDER BY revision DESC LIMIT ?",
                (max(int(limit), 0),)).fetchall()
        return [LearnedEntry(r[0], r[1], json.loads(r[2]), json.loads(r[3]), r[4],
                             json.loads(r[5]), r[6], r[7]) for r in reversed(rows)]

    def latest_learned(self) -> LearnedEntry | None:
        rows = self.learned_history(limit=1)
        return rows[0] if rows else None

    def close(self) -> None:
        with self._lock:
            if self._conn is not None:
                try:
                    self._conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
                except sqlite3.Error:
                    pass
                self._conn.close()
                # closed for good: any later use fails at once on None
                self._conn = None  # type: ignore[assignment]

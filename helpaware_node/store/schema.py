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

"""The store file's schema, versioned, and the migrations that bring an older file up to date.

Each migration is a list of statements run in one transaction with the version bump, so a
file is always at exactly one version.  Add a migration by appending to MIGRATIONS; never
edit one that has shipped.
"""
from __future__ import annotations

import sqlite3

# version n is reached by running MIGRATIONS[n - 1] on a file at version n - 1
MIGRATIONS: list[list[str]] = [
    # 1: the event log (source of truth), the opt-out list, file facts
    [
        """CREATE TABLE meta (name TEXT PRIMARY KEY, value TEXT NOT NULL)""",
        # rowid tables: interior b-tree pages then hold only integers, and every copy of a
        # person key sits in an index that forget() rebuilds (REINDEX) so none lingers
        """CREATE TABLE events (
               row_id       INTEGER PRIMARY KEY,
               event_id     TEXT NOT NULL UNIQUE,  -- "<robot_id>/<sequence>"
               person_key   TEXT NOT NULL,      -- HMAC-SHA256 hex, never a raw id
               time_s       REAL NOT NULL,
               busyness     REAL NOT NULL,
               ask_load     REAL NOT NULL,
               result       TEXT NOT NULL,
               request_kind TEXT NOT NULL DEFAULT ''
           )""",
        """CREATE INDEX events_by_person ON events (person_key, time_s, event_id)""",
        """CREATE TABLE opt_out (row_id INTEGER PRIMARY KEY, person_key TEXT NOT NULL UNIQUE,
                                 since_s REAL NOT NULL)""",
    ],
    # 2: the per-person fold cache with its compaction base, and the sequence counters
    [
        """CREATE TABLE snapshot (
               row_id        INTEGER PRIMARY KEY,
               person_key    TEXT NOT NULL UNIQUE,
               a             REAL NOT NULL,     -- belief after every event (and the base)
               b             REAL NOT NULL,
               last_time_s   REAL,              -- order key of the last event folded in
               last_event_id TEXT,
               event_count   INTEGER NOT NULL,  -- events folded in, compacted ones included
               model_hash    TEXT NOT NULL,     -- site model the fold used
               base_a        REAL,              -- fold of compacted (deleted) events; NULL: prior
               base_b        REAL,
               base_time_s   REAL,
               base_event_id TEXT,
               base_count    INTEGER NOT NULL DEFAULT 0
           )""",
        """CREATE TABLE sequences (robot_id TEXT PRIMARY KEY, next_seq INTEGER NOT NULL)
           WITHOUT ROWID""",
    ],
    # 3: asks, written before each decision to ask is published, so the hard limits (re-ask
    # interval, daily and hourly caps) count the asks made before a restart; peers' too
    [
        """CREATE TABLE asks (
               row_id       INTEGER PRIMARY KEY,
               event_id     TEXT NOT NULL UNIQUE,  -- "<robot_id>/<sequence>", as events
               robot_id     TEXT NOT NULL,      -- the part of event_id before the last '/'
               person_key   TEXT NOT NULL,      -- HMAC-SHA256 hex, never a raw id
               time_s       REAL NOT NULL,
               request_kind TEXT NOT NULL DEFAULT '',
               request_id   TEXT NOT NULL DEFAULT ''
           )""",
        """CREATE INDEX asks_by_person ON asks (person_key, time_s)""",
        """CREATE INDEX asks_by_robot ON asks (robot_id, time_s)""",
        """CREATE INDEX asks_by_request ON asks (request_id, robot_id)""",
    ],
    # 4: the site constants learned online (fit/online.py), one row per revision put in
    # force, so a restart resumes with them and `helpaware store learned` shows their history
    [
        """CREATE TABLE learned_constants (
               row_id       INTEGER PRIMARY KEY,
               revision     INTEGER NOT NULL UNIQUE,
               time_s       REAL NOT NULL,      -- the node's clock at the refit
               recorded_utc TEXT NOT NULL,
               robot_id     TEXT NOT NULL,
               constants    TEXT NOT NULL,      -- JSON: learned SiteModel fields, decline_aloud
               target       TEXT NOT NULL,      -- JSON: parameter file values, prior_weight
               n_outcomes   INTEGER NOT NULL,
               verdict      TEXT NOT NULL       -- JSON: ConvergenceVerdict.to_dict()
           )""",
    ],
]
SCHEMA_VERSION = len(MIGRATIONS)


class StoreVersionError(RuntimeError):
    """The file was written by a newer version of this package."""


def file_version(conn: sqlite3.Connection) -> int:
    return int(conn.execute("PRAGMA user_version").fetchone()[0])


def migrate(conn: sqlite3.Connection, target: int = SCHEMA_VERSION) -> list[int]:
    """Bring the file to `target`; returns the versions applied. Connection in autocommit."""
    current = file_version(conn)
    if current > SCHEMA_VERSION:
        raise StoreVersionError(
            f"store schema version {current} is newer than this package knows "
            f"({SCHEMA_VERSION}); upgrade helpaware_node or use another store path")
    applied = []
    for version in range(current + 1, target + 1):
        conn.execute("BEGIN IMMEDIATE")
        try:
            for statement in MIGRATIONS[version - 1]:
                conn.execute(statement)
            conn.execute(f"PRAGMA user_version = {version}")
            conn.execute("INSERT OR REPLACE INTO meta VALUES ('schema_version', ?)",
                         (str(version),))
            conn.execute("COMMIT")
        except BaseException:
            conn.execute("ROLLBACK")
            raise
        applied.append(version)
    return applied

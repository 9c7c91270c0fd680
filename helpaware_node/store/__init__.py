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

"""Persistence of outcome events, asks and belief snapshots."""
from __future__ import annotations

import os
import socket

from .base import (
    append_batch,
    AskEvent,
    BeliefStore,
    MemoryStore,
    person_key,
    StoredEvent,
    StoreHealth,
)
from .keys import (
    default_key_path,
    default_store_path,
    KEY_FILE_NAME,
    key_fingerprint,
    load_site_key,
    load_site_keys,
    SiteKeyError,
    SiteKeys,
)
from .schema import SCHEMA_VERSION, StoreVersionError
from .sqlite import SqliteStore, StoreCorruptError
from ..core import SiteModel


def default_robot_id() -> str:
    """HELPAWARE_ROBOT_ID, else the host name (no '/'), so each robot's ids are its own."""
    rid = os.environ.get("HELPAWARE_ROBOT_ID") or socket.gethostname().split(".")[0] or "robot"
    return rid.replace("/", "_")


def open_store(path: str = "", robot_id: str = "", model: SiteModel | None = None,
               key_path: str = "", retention_days: float = 0.0) -> BeliefStore:
    """Return the store the node uses.

    `path` empty: in this process only (MemoryStore, a random key per run).  Otherwise an
    SQLite file (the node's default is `default_store_path()`: ROS_HOME or ~/.ros, then
    helpaware/beliefs.sqlite3).  The site key is read from `key_path`, by default the file
    `site_key` beside the store, and created owner-only if missing.
    """
    if not path:
        return MemoryStore(robot_id=robot_id or default_robot_id())
    site_keys = load_site_keys(key_path or key_path_for(path))
    return SqliteStore(path, robot_id or default_robot_id(), site_keys, model=model,
                       retention_days=retention_days)


def key_path_for(store_path: str) -> str:
    """Return the site key file a store file uses by default: `site_key` in the same directory."""
    return os.path.join(os.path.dirname(os.path.abspath(store_path)), KEY_FILE_NAME)


__all__ = ["AskEvent", "BeliefStore", "MemoryStore", "SqliteStore", "StoredEvent", "StoreHealth",
           "append_batch",
           "StoreCorruptError", "StoreVersionError", "SiteKeyError", "SCHEMA_VERSION",
           "person_key", "open_store", "load_site_key", "load_site_keys", "SiteKeys",
           "key_path_for", "key_fingerprint", "default_robot_id",
           "default_store_path", "default_key_path"]

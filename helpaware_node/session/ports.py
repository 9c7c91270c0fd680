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

"""What a help session needs from the world around it: a store, and a way to write outcomes.

`SqliteStore` and `MemoryStore` both satisfy `SessionStore`; a test may give anything lighter
with these methods. Outcomes go through an `OutcomeWriter`: `DirectWrites` (simulator, tests)
writes them straight to the store; the node gives one that holds what the store refuses and
retries it (ros/store_retry.py). While any outcome is held the session asks nobody.
"""
from __future__ import annotations

from typing import Iterable, Optional, Protocol

from .state import Note
from ..core import Belief, SiteModel
from ..core.model import MAX_ASKS_CAP
from ..store.base import AskEvent, StoredEvent


class SessionStore(Protocol):
    robot_id: str

    def key_for(self, raw_id: str) -> str: ...
    def next_event_id(self) -> str: ...
    def belief(self, key: str, model: SiteModel) -> tuple[Belief, Optional[float]]: ...
    def is_opted_out(self, key: str) -> bool: ...
    def append(self, event: StoredEvent) -> bool: ...
    def append_asks(self, asks: Iterable[AskEvent]) -> list[AskEvent]: ...

    def asks(self, *, person_key: Optional[str] = None, robot_id: Optional[str] = None,
             request_id: Optional[str] = None, since_s: Optional[float] = None,
             limit: int = MAX_ASKS_CAP) -> list[AskEvent]: ...

    def move_asks_forward(self, by_s: float) -> int: ...


class OutcomeWriter(Protocol):

    def write(self, event: StoredEvent) -> Optional[bool]:
        """Return True: stored; False: not stored (duplicate, opted out).

        None: kept to be written later. Raises when the store refused it (a holding writer keeps it
        as well).
        """

    @property
    def waiting(self) -> int:
        """Outcomes kept for a store that refused them."""

    def drop_person(self, key: str) -> None:
        """Drop a forgotten person: any outcome of theirs still kept is never written."""


class DirectWrites:
    """Outcomes straight into the store; a refusal is the caller's to see (nothing kept)."""

    waiting = 0

    def __init__(self, store: SessionStore) -> None:
        self._store = store

    def write(self, event: StoredEvent) -> Optional[bool]:
        return self._store.append(event)

    def drop_person(self, key: str) -> None:
        pass


class StoreStatus:
    """Whether the store takes reads and writes, and its last refusal (for /diagnostics)."""

    def __init__(self, label: str = "store") -> None:
        self.label = label
        self.ok = True
        self.error = ""

    def failed(self, what: str, exc: BaseException) -> Note:
        self.ok = False
        self.error = f"{what}: {exc}"[:200]
        return Note("error", f"{self.label} refused {what} ({exc}); belief unchanged, "
                    f"outcomes kept and retried, nobody asked while one waits (check free "
                    f"disk space and that the file is writable)", throttle_s=5.0,
                    kind="store_refused")

    def wrote(self, store: object) -> None:
        """Note that a write went through.

        Healthy again unless the store itself says otherwise (a damaged file moved aside at start
        stays an error).
        """
        health = getattr(store, "health", None)
        self.ok = health is None or health.level == "OK"

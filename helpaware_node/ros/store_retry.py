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

"""Outcomes the store refuses (disk full, read-only, I/O error): held in order and retried.

The node gives this writer to its help session. A refused outcome is kept in memory, in order
(bounded: the oldest goes first), and written again by `retry()` from the node's housekeeping
timer; an outcome that arrives while others wait queues behind them. While any is held the
session asks nobody, so the robot never acts on a belief it could not save. Once one is
stored, `on_saved` lets the session learn from it and the node share it with the fleet.
"""
from __future__ import annotations

from typing import Callable, Optional

from ..session import StoreStatus
from ..store.base import StoredEvent

MAX_UNSAVED_EVENTS = 10_000    # outcomes held in memory while the store refuses writes


class HeldOutcomes:
    def __init__(self, store, status: StoreStatus, logger,
                 on_saved: Callable[[StoredEvent], None], limit: int = MAX_UNSAVED_EVENTS) -> None:
        self._store = store
        self._status = status
        self._logger = logger
        self._on_saved = on_saved
        self._limit = limit
        self.held: list[StoredEvent] = []
        self.dropped = 0

    @property
    def waiting(self) -> int:
        return len(self.held)

    def write(self, event: StoredEvent) -> Optional[bool]:
        """Store now (True/False as store.append), or hold.

        None behind earlier refusals, and the store's error raised when it refuses this one.
        """
        if self.held:
            self._hold(event)
            return None
        try:
            return self._store.append(event)
        except Exception:
            self._hold(event)
            raise

    def _hold(self, event: StoredEvent) -> None:
        if len(self.held) >= self._limit:      # bounded memory: the oldest goes
            self.held.pop(0)
            self.dropped += 1
            self._logger.error(f"{self._limit} outcomes wait for the store: the oldest is "
                               f"dropped ({self.dropped} so far)", throttle_duration_sec=10.0)
        self.held.append(event)

    def drop_person(self, key: str) -> None:
        self.held = [e for e in self.held if e.person_key != key]

    def retry(self) -> None:
        """Write held outcomes in order; stop at the first refusal and keep the rest."""
        if not self.held:
            return
        while self.held:
            event = self.held[0]
            try:
                stored = self._store.append(event)
            except Exception as exc:  # noqa: BLE001 - still refused: keep it, try again later
                note = self._status.failed("append (retry)", exc)
                self._logger.error(note.text, throttle_duration_sec=note.throttle_s)
                return
            self.held.pop(0)
            if stored:      # False: opted out meanwhile, or already there
                self._on_saved(event)
        self._status.wrote(self._store)
        self._logger.info("store accepts writes again: held outcomes saved, asking resumes")

    def report_at_stop(self) -> None:
        """Say what a stop while the store refuses writes costs: said once, then let go."""
        if self.held:
            self._logger.error(f"stopping with {len(self.held)} outcome(s) the store refused "
                               f"({self._status.error}); they are not saved")
            self.held = []

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

"""The person records a session holds: loaded from the store when first needed, bounded.

A record in memory is complete: its belief is the store's fold of the person's outcomes, and
its ask times are the person's stored asks (own, and peers' when they count) plus every ask
made since. A record that is not in memory is loaded whole on first use, so dropping one to
bound memory forgets nothing the limits count.
"""
from __future__ import annotations

from dataclasses import replace
from typing import Iterable, Optional

from .ports import SessionStore
from ..core import note_ask, note_candidate, PersonRecord, SiteModel
from ..core.model import DecisionConfig
from ..core.person import ask_history_horizon_s
from ..store.base import AskEvent


class PersonMemory:
    def __init__(self, store: SessionStore, model: SiteModel, robot_id: str,
                 count_peer_asks: bool, max_records: int) -> None:
        self.store = store
        self.model = model
        self.robot_id = robot_id
        self.count_peer_asks = count_peer_asks
        self.max_records = max_records
        self.records: dict[str, PersonRecord] = {}
        self.last_seen_s: dict[str, float] = {}     # person key -> when last in view
        self.evicted = 0
        # records whose belief was folded under an earlier model: refolded when next read
        self._stale: set[str] = set()

    # -- reading
    def record_for(self, key: str) -> PersonRecord:
        """Return the person's record, loaded from the store (belief and asks) if not held."""
        rec = self.records.get(key)
        if rec is None:
            rec = self._with_stored_asks(self._with_stored_belief(PersonRecord.new(self.model),
                                                                  key), key)
            self.records[key] = rec
        elif key in self._stale:
            rec = self.records[key] = self._with_stored_belief(rec, key)
        self._stale.discard(key)
        return rec

    def held(self, key: str) -> Optional[PersonRecord]:
        """Return the record when held, its belief refolded if the model changed; else None.

        For displays, which must not load people from the store.
        """
        return self.record_for(key) if key in self.records else None

    def counts(self, ask: AskEvent) -> bool:
        """Whether an ask counts for its person's limits here (own always; peers' by rule)."""
        return self.count_peer_asks or ask.robot_id == self.robot_id

    def _with_stored_belief(self, rec: PersonRecord, key: str) -> PersonRecord:
        belief, t = self.store.belief(key, self.model)
        return replace(rec, belief=belief, belief_time_s=t)

    def _with_stored_asks(self, rec: PersonRecord, key: str) -> PersonRecord:
        rec = replace(rec, ask_times_s=())
        for ask in self.store.asks(person_key=key):      # time order; note_ask prunes
            if self.counts(ask):
                rec = note_ask(rec, ask.time_s, self.model)
        return rec

    # -- changes
    def refresh_belief(self, key: str) -> None:
        """Note that an outcome of this person was stored: the belief is the store's fold again."""
        rec = self.records.get(key)
        if rec is not None:
            self.records[key] = self._with_stored_belief(rec, key)
            self._stale.discard(key)

    def note_ask(self, key: str, time_s: float) -> None:
        self.records[key] = note_ask(self.record_for(key), time_s, self.model)

    def note_peer_asks(self, asks: Iterable[AskEvent]) -> None:
        """Peers' asks just stored: held records take them (others load them when needed)."""
        for ask in asks:
            rec = self.records.get(ask.person_key)
            if rec is not None and self.counts(ask):
                self.records[ask.person_key] = note_ask(rec, ask.time_s, self.model)

    def withdraw_ask(self, key: str, time_s: float) -> None:
        """Withdraw an ask that never reached the person (could_not_ask).

        It adds no ask load in memory. The stored ask stays, so after a restart it counts again
        (the stricter side).
        """
        rec = self.records.get(key)
        if rec is not None:
            times = list(rec.ask_times_s)
            if time_s in times:
                times.remove(time_s)
            self.records[key] = replace(rec, ask_times_s=tuple(times))

    def note_candidate(self, key: str, now_s: float) -> None:
        self.records[key] = note_candidate(self.record_for(key), now_s)

    def note_candidates(self, keys: Iterable[str], now_s: float) -> None:
        """note_candidate for each key; held records (the usual case at a need) read directly."""
        records, stale = self.records, self._stale
        for key in keys:
            rec = records.get(key)
            if rec is None or key in stale:
                rec = self.record_for(key)
            records[key] = note_candidate(rec, now_s)

    def saw(self, key: str, now_s: float) -> None:
        self.last_seen_s[key] = now_s

    def forget(self, key: str) -> None:
        self.records.pop(key, None)
        self.last_seen_s.pop(key, None)
        self._stale.discard(key)

    def drop(self, key: str) -> None:
        """Let go of a record that may be out of date.

        It loads whole from the store on its next use.
        """
        self.records.pop(key, None)

    def move_asks_forward(self, by_s: float) -> None:
        for key, rec in self.records.items():
            if rec.ask_times_s:
                self.records[key] = replace(rec, ask_times_s=tuple(t + by_s
                                                                   for t in rec.ask_times_s))

    def use_model(self, model: SiteModel) -> None:
        """Put a model in force; each held record is refolded when next read.

        The belief of each person is the fold of their events under the model in force: each held
        record is refolded when it is next read (record_for), not here, so a change of constants
        (site learning) costs the caller nothing however many people are held.
        """
        if model != self.model:
            self.model = model
            self._stale = set(self.records)

    def use_peer_rule(self, count_peer_asks: bool) -> None:
        if count_peer_asks != self.count_peer_asks:
            self.count_peer_asks = count_peer_asks
            for key, rec in list(self.records.items()):
                self.records[key] = self._with_stored_asks(rec, key)

    # -- bounds
    def evict_if_needed(self, now_s: float, keep: set[str], config: DecisionConfig) -> None:
        """Keep memory bounded on a busy site.

        Drop the records of the people seen longest ago, down to 90 % of the limit. Their beliefs
        and asks stay in the store and come back when they are seen again; only their encounter
        count and first-seen time are lost. People in `keep` (in view, with a pending ask) and
        people asked within the ask memory are never dropped.
        """
        if len(self.records) <= self.max_records and len(self.last_seen_s) <= 2 * self.max_records:
            return
        horizon = ask_history_horizon_s(self.model)
        droppable = [k for k, r in self.records.items() if k not in keep
                     and not any(now_s - t < horizon for t in r.ask_times_s)]
        droppable.sort(key=lambda k: self.last_seen_s.get(k, float("-inf")))
        for key in droppable[:max(len(self.records) - int(0.9 * self.max_records), 0)]:
            del self.records[key]
            self.last_seen_s.pop(key, None)
            self._stale.discard(key)
            self.evicted += 1
        for key in [k for k in self.last_seen_s if k not in self.records and k not in keep]:
            del self.last_seen_s[key]     # seen, never a candidate: nothing to keep

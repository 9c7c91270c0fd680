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

"""The store interface every backend implements, and the in-memory backend.

The append-only log of outcome events is the source of truth; a person's belief is the fold
(`core.person.fold_events`) of their events in (time, event id) order.  Asks are events too
(`AskEvent`, written before the decision to ask is published): they carry no evidence, only
what the hard limits count after a restart.  Persons are known only by `person_key`, an HMAC
of the perceived id: raw ids never enter a store.
"""
from __future__ import annotations

from dataclasses import dataclass
import hashlib
import hmac
import math
import os
from typing import Any, Iterable, Optional, Protocol, Union

from .ids import check_ask, check_event, check_robot_id
from .keys import SiteKeys
from ..core import Belief, fold_events, OutcomeEvent, Result, SiteModel
from ..core.model import CoreInputError, MAX_ASKS_CAP


@dataclass(frozen=True)
class StoreHealth:
    """For the node's diagnostics: "OK", or "ERROR" with what happened."""

    level: str          # "OK" or "ERROR" (diagnostic_msgs level names)
    message: str = ""


@dataclass(frozen=True)
class StoredEvent:
    """One outcome as stored and shared: hashed person key, never the raw id."""

    event_id: str          # "<robot_id>/<sequence>", unique across the fleet
    person_key: str        # hex HMAC-SHA256 of the perceived id under the site key
    time_s: float          # when the ask was made
    result: Result
    busyness: float        # context at the ask
    ask_load: float
    request_kind: str = ""

    def to_outcome(self) -> OutcomeEvent:
        return OutcomeEvent(self.time_s, self.result, self.busyness, self.ask_load,
                            event_id=self.event_id)


@dataclass(frozen=True)
class AskEvent:
    """One ask as stored and shared, keyed like outcomes (hashed person key, never the raw id)."""

    event_id: str          # "<robot_id>/<sequence>": the robot's own sequence, as outcomes
    person_key: str
    time_s: float          # when the ask was made (the robot's clock)
    request_kind: str = ""
    request_id: str = ""   # the help need it was made for (unique per robot)

    @property
    def robot_id(self) -> str:
        return self.event_id.rpartition("/")[0]


AnyEvent = Union[StoredEvent, AskEvent]


@dataclass(frozen=True)
class LearnedEntry:
    """One revision of the site constants learned online, as the store keeps it.

    One revision of the site constants learned online (fit/online.py), as kept in the store's
    history: plain values only, so the store needs nothing of the fit.
    """

    revision: int              # 1, 2, ...: each change of the constants in force
    time_s: float              # the node's clock at the refit
    constants: dict[str, Any]  # the learned SiteModel fields (and decline_aloud)
    target: dict[str, Any]     # the parameter file's values it was shrunk towards, prior_weight
    n_outcomes: int            # outcomes the refit used
    verdict: dict[str, Any]    # ConvergenceVerdict.to_dict() of the refit
    recorded_utc: str = ""     # wall-clock time it was stored
    robot_id: str = ""


@dataclass(frozen=True)
class EventsReader:
    """The events site learning reads, copied when it was made (a MemoryStore's).

    Callable, and picklable, so the refit can run in another thread or process.
    """

    outcomes: tuple[StoredEvent, ...]
    asks: tuple[AskEvent, ...]

    def __call__(self) -> tuple[list[StoredEvent], list[AskEvent]]:
        return list(self.outcomes), list(self.asks)


def check_learned(entry: LearnedEntry) -> None:
    """Refuse a history row that is not plain, finite values (names the field)."""
    if isinstance(entry.revision, bool) or not isinstance(entry.revision,
                                                          int) or entry.revision < 1:
        raise CoreInputError(f"revision: {entry.revision!r} must be a whole number >= 1")
    for name in ("constants", "target"):
        values = getattr(entry, name)
        if not isinstance(values, dict) or not all(
                isinstance(k, str) and isinstance(v, (int, float)) and not isinstance(v, bool)
                and math.isfinite(v) for k, v in values.items()):
            raise CoreInputError(f"{name}: expected names with finite numbers")
    if not isinstance(entry.n_outcomes, int) or entry.n_outcomes < 0:
        raise CoreInputError(f"n_outcomes: {entry.n_outcomes!r} must be a whole number >= 0")


class _Appends(Protocol):

    def append(self, event: StoredEvent) -> bool: ...

    def append_asks(self, asks: Iterable[AskEvent]) -> list[AskEvent]: ...


def append_batch(store: _Appends, events: Iterable[AnyEvent]) -> list[AnyEvent]:
    """Store a mixed batch (a fleet delivery).

    Outcomes in one transaction, then asks in another; returns what was new. Both are idempotent,
    so a batch retried after a refusal stores each event once.
    """
    events = list(events)
    outcomes = [e for e in events if isinstance(e, StoredEvent)]
    asks = [e for e in events if isinstance(e, AskEvent)]
    stored: list[AnyEvent] = []
    if outcomes:
        many = getattr(store, "append_many", None)   # one transaction where the store has it
        stored += (many(outcomes) if many is not None
                   else [e for e in outcomes if store.append(e)])
    if asks:
        stored += store.append_asks(asks)
    return stored


def person_key(site_key: bytes, raw_id: str) -> str:
    """HMAC-SHA256(site_key, raw_id) as hex: stable per site, not reversible without the key."""
    return hmac.new(site_key, raw_id.encode("utf-8"), hashlib.sha256).hexdigest()


class BeliefStore(Protocol):
    """What the node, the tools and the fleet exchange need from a store."""

    robot_id: str

    def key_for(self, raw_id: str) -> str: ...
    def next_event_id(self) -> str: ...      # "<robot_id>/<sequence>", never reused
    # durable on return; False: not stored (duplicate, opted out)
    def append(self, event: StoredEvent) -> bool: ...
    def events_for(self, key: str) -> list[StoredEvent]: ...
    def keys(self) -> list[str]: ...
    def belief(self, key: str, model: SiteModel) -> tuple[Belief, float | None]: ...
    def is_opted_out(self, key: str) -> bool: ...
    def opt_out(self, key: str) -> None: ...
    def forget(self, key: str) -> int: ...                     # events removed (asks go too)
    def append_asks(self, asks: Iterable[AskEvent]) -> list[AskEvent]: ...   # durable; new ones

    def asks(self, *, person_key: Optional[str] = None, robot_id: Optional[str] = None,
             request_id: Optional[str] = None, since_s: Optional[float] = None,
             limit: int = MAX_ASKS_CAP) -> list[AskEvent]: ...   # newest `limit`, in time order

    def move_asks_forward(self, by_s: float) -> int: ...      # a forward jump of the clock
    def opted_out(self) -> list[str]: ...
    def use_model(self, model: SiteModel) -> None: ...        # the model beliefs fold under
    def close(self) -> None: ...


class MemoryStore:
    """A store that keeps everything in this process (tests, simulator, no-disk runs)."""

    def __init__(self, site_key: bytes | SiteKeys | None = None, robot_id: str = "robot") -> None:
        if not isinstance(site_key, SiteKeys):
            site_key = SiteKeys.single(site_key if site_key is not None else os.urandom(32))
        self.site_keys = site_key          # hashing key, and the fleet signing roots
        self._site_key = site_key.person_id_key
        self.robot_id = check_robot_id(robot_id)
        self.health = StoreHealth("OK", "in memory (nothing kept after exit)")
        self._next_seq = 1
        self._events: dict[str, StoredEvent] = {}
        self._by_key: dict[str, list[str]] = {}
        self._opted_out: set[str] = set()
        # key -> (model, belief, last time, last order)
        self._folds: dict[str, tuple[Any, ...]] = {}
        self._asks: dict[str, AskEvent] = {}
        self._asks_by: dict[tuple[str, str], list[str]] = {}   # (field, value) -> ask ids
        self._learned: list[LearnedEntry] = []

    def key_for(self, raw_id: str) -> str:
        return person_key(self._site_key, raw_id)

    def next_event_id(self) -> str:
        seq, self._next_seq = self._next_seq, self._next_seq + 1
        return f"{self.robot_id}/{seq}"

    def append(self, event: StoredEvent) -> bool:
        check_event(event)          # the rules of every store (store/ids.py)
        if event.event_id in self._events or event.person_key in self._opted_out:
            return False
        self._events[event.event_id] = event
        self._by_key.setdefault(event.person_key, []).append(event.event_id)
        return True

    def extend(self, events: Iterable[StoredEvent]) -> int:
        return sum(self.append(e) for e in events)

    def events_for(self, key: str) -> list[StoredEvent]:
        return [self._events[i] for i in self._by_key.get(key, [])]

    def keys(self) -> list[str]:
        return sorted(self._by_key)

    def belief(self, key: str, model: SiteModel) -> tuple[Belief, float | None]:
        """Return the fold of the person's events.

        Extended by the newest event when it comes last in (time, event id) order (the same
        arithmetic as folding all again), else refolded.
        """
        ids = self._by_key.get(key, [])
        cached = self._folds.get(key)
        if cached is not None and cached[0] == model and cached[4] == len(ids):
            return cached[1], cached[2]
        newest = self._events[ids[-1]] if ids else None
        if (cached is not None and newest is not None and cached[0] == model
                and cached[4] == len(ids) - 1 and (newest.time_s, newest.event_id) > cached[3]):
            belief, last = fold_events([newest.to_outcome()], model, cached[1], cached[2])
        else:
            belief, last = fold_events([e.to_outcome() for e in self.events_for(key)], model)
        if ids:
            order = max((self._events[i].time_s, i) for i in ids)
            self._folds[key] = (model, belief, last, order, len(ids))
        return belief, last

    def is_opted_out(self, key: str) -> bool:
        return key in self._opted_out

    def opt_out(self, key: str) -> None:
        self._opted_out.add(key)

    def opted_out(self) -> list[str]:
        return sorted(self._opted_out)

    def forget(self, key: str) -> int:
        ids = self._by_key.pop(key, [])
        for i in ids:
            del self._events[i]
        self._folds.pop(key, None)
        for i in self._asks_by.pop(("person_key", key), []):
            ask = self._asks.pop(i)
            for field in ("robot_id", "request_id"):
                self._asks_by[(field, getattr(ask, field))].remove(i)
        self._opted_out.discard(key)
        return len(ids)

    # -- asks
    def append_asks(self, asks: Iterable[AskEvent]) -> list[AskEvent]:
        asks = list(asks)
        for ask in asks:            # all or nothing, like SqliteStore
            check_ask(ask)
        stored = []
        for ask in asks:
            if ask.event_id in self._asks or ask.person_key in self._opted_out:
                continue
            self._asks[ask.event_id] = ask
            for field in ("person_key", "robot_id", "request_id"):
                self._asks_by.setdefault((field, getattr(ask, field)), []).append(ask.event_id)
            stored.append(ask)
        return stored

    def asks(self, *, person_key: Optional[str] = None, robot_id: Optional[str] = None,
             request_id: Optional[str] = None, since_s: Optional[float] = None,
             limit: int = MAX_ASKS_CAP) -> list[AskEvent]:
        """Asks matching every filter given (and at or after `since_s`).

        The newest `limit` of them, in (time, event id) order.
        """
        filters = [(f, v) for f, v in (("person_key", person_key), ("robot_id", robot_id),
                                       ("request_id", request_id)) if v is not None]
        if filters:      # the shortest index list, then the other filters on each ask
            lists = [self._asks_by.get(f, []) for f in filters]
            ids = min(lists, key=len)
            found = [self._asks[i] for i in ids
                     if all(getattr(self._asks[i], f) == v for f, v in filters)]
        else:
            found = list(self._asks.values())
        found = sorted((a for a in found if since_s is None or a.time_s >= since_s),
                       key=lambda a: (a.time_s, a.event_id))
        return found[max(len(found) - max(int(limit), 0), 0):]

    def move_asks_forward(self, by_s: float) -> int:
        moved = list(self._asks.values())
        for a in moved:
            self._asks[a.event_id] = AskEvent(a.event_id, a.person_key, a.time_s + by_s,
                                              a.request_kind, a.request_id)
        return len(moved)

    def event_count(self) -> int:
        return len(self._events)

    def use_model(self, model: SiteModel) -> None:
        """Set the model beliefs are folded under from now on (folds are cached per model)."""

    def learning_reader(self) -> EventsReader:
        """(outcomes, asks) of people not opted out, for a refit in another thread or process.

        The copies are taken now, on the caller's thread.
        """
        return EventsReader(
            tuple(e for e in self._events.values() if e.person_key not in self._opted_out),
            tuple(a for a in self._asks.values() if a.person_key not in self._opted_out))

    # -- learned site constants (fit/online.py)
    def record_learned(self, entry: LearnedEntry) -> None:
        check_learned(entry)
        if any(e.revision == entry.revision for e in self._learned):
            raise CoreInputError(f"revision: {entry.revision} is already in the history")
        self._learned.append(entry)

    def learned_history(self, limit: int = 1000) -> list[LearnedEntry]:
        """Return the newest `limit` revisions, oldest first."""
        out = sorted(self._learned, key=lambda e: e.revision)
        return out[max(len(out) - int(limit), 0):]

    def latest_learned(self) -> Optional[LearnedEntry]:
        return max(self._learned, key=lambda e: e.revision, default=None)

    def close(self) -> None:
        pass
